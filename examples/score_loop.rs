//! Profiling aid: analyze and score N synthetic log lines (N from argv, default 100000) with a
//! model trained on 20,000 of them; run under `valgrind --tool=callgrind` for instruction counts
//! per record that do not depend on machine load. Mode "learn" profiles learning instead.

use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams, ScoreScratch};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

const CLASSES: [&str; 8] = ["timeout", "auth", "disk", "dns", "payment", "queue", "tls", "oom"];

fn line(rng: &mut SplitMix64, c: usize) -> String {
    const SVC: [&str; 4] = ["checkout-api", "inventory-sync", "mail-relay", "pack-station"];
    const W: [&str; 8] = ["upstream timed out", "token rejected", "no space left", "lookup failed for", "card declined by", "consumer lagging on", "handshake failed", "heap exhausted"];
    format!(
        "2026-01-{:02}T{:02}:{:02}:{:02}Z {} level=error req={:08x} {} 10.0.{}.{}:{} after {}ms (retry {})",
        1 + rng.below(28), rng.below(24), rng.below(60), rng.below(60), SVC[rng.below(4) as usize],
        rng.next_u64() as u32, W[c], rng.below(256), rng.below(256), 1024 + rng.below(60000), rng.below(9000), rng.below(5)
    )
}

fn main() {
    let n: usize = std::env::args().nth(1).and_then(|s| s.parse().ok()).unwrap_or(100_000);
    let mode = std::env::args().nth(2).unwrap_or_else(|| "score".into());
    let s = Settings::defaults();
    let a = Analyzer::new(&s.analyzer).unwrap();
    let mut m = Model::new(NbParams::multinomial(0.5), s.analyzer.clone(), CLASSES.iter().map(|c| c.to_string()).collect(), Vocabulary::new(s.model.vocabulary, s.model.max_vocabulary, 0)).unwrap();
    let mut rng = SplitMix64::new(1);
    let mut sc = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    for _ in 0..20_000 {
        let c = rng.below(8) as usize;
        a.analyze_fields([(line(&mut rng, c).as_str(), 1.0)], &mut sc, &mut bag);
        m.learn(&bag, CLASSES[c], 1.0).unwrap();
    }
    let recs: Vec<(String, usize)> = (0..n).map(|_| { let c = rng.below(8) as usize; (line(&mut rng, c), c) }).collect();
    let mut ss = ScoreScratch::default();
    let t = std::time::Instant::now();
    let mut acc = 0usize;
    for (r, c) in &recs {
        match mode.as_str() {
            "gen" => acc += r.len(),
            "analyze" => {
                a.analyze_fields([(r.as_str(), 1.0)], &mut sc, &mut bag);
                acc += bag.len();
            }
            "learn" => {
                a.analyze_fields([(r.as_str(), 1.0)], &mut sc, &mut bag);
                m.learn(&bag, CLASSES[*c], 1.0).unwrap();
            }
            _ => {
                a.analyze_fields([(r.as_str(), 1.0)], &mut sc, &mut bag);
                acc += m.score(&bag, &mut ss).best;
            }
        }
    }
    eprintln!("{mode}: {n} records in {:.3}s ({:.0}/s) [{acc}]", t.elapsed().as_secs_f64(), n as f64 / t.elapsed().as_secs_f64());
}
