//! Core speed: analyze + score and analyze + learn on ~120-byte log lines with 8 classes,
//! default analyzer (every collapsing family on), one core, in process.
//!
//! Run: `cargo bench --bench core`. Throughput is reported per record.

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams, ScoreScratch};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

const CLASSES: [&str; 8] = ["timeout", "auth", "disk", "dns", "payment", "queue", "tls", "oom"];
const SERVICES: [&str; 6] = ["checkout-api", "inventory-sync", "mail-relay", "pack-station", "trail-maps", "gear-search"];
const WORDS: [[&str; 4]; 8] = [
    ["upstream timed out", "deadline exceeded", "no response within", "read timeout"],
    ["token rejected", "login failed for", "permission denied", "session expired"],
    ["disk quota reached", "no space left", "write failed on", "volume read-only"],
    ["lookup failed for", "resolver unreachable", "nxdomain for host", "dns cache miss"],
    ["card declined by", "payment gateway error", "charge reversed", "refund stuck at"],
    ["queue depth high", "consumer lagging on", "message redelivered", "broker backlog"],
    ["handshake failed", "certificate expired", "tls alert from", "cipher mismatch"],
    ["out of memory", "heap exhausted", "oom killer hit", "allocation failed"],
];

/// A ~120-byte log line of class `c`, with timestamps, ids, addresses and numbers.
fn line(rng: &mut SplitMix64, c: usize) -> String {
    let svc = SERVICES[rng.below(6) as usize];
    let w = WORDS[c][rng.below(4) as usize];
    let w2 = WORDS[rng.below(8) as usize][rng.below(4) as usize];
    format!(
        "2026-01-{:02}T{:02}:{:02}:{:02}Z {svc} level=error req={:08x} {w} 10.0.{}.{}:{} after {}ms ({w2})",
        1 + rng.below(28),
        rng.below(24),
        rng.below(60),
        rng.below(60),
        rng.next_u64() as u32,
        rng.below(256),
        rng.below(256),
        1024 + rng.below(60000),
        rng.below(9000)
    )
}

fn dataset(n: usize, seed: u64) -> Vec<(String, usize)> {
    let mut rng = SplitMix64::new(seed);
    (0..n).map(|_| {
        let c = rng.below(8) as usize;
        (line(&mut rng, c), c)
    }).collect()
}

fn trained(analyzer: &Analyzer, settings: &Settings) -> Model {
    let mut m = Model::new(
        NbParams::multinomial(0.5),
        settings.analyzer.clone(),
        CLASSES.iter().map(|c| c.to_string()).collect(),
        Vocabulary::new(settings.model.vocabulary, settings.model.max_vocabulary, settings.model.hash_buckets),
    )
    .unwrap();
    let mut s = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    for (text, c) in dataset(50_000, 1) {
        analyzer.analyze_fields([(text.as_str(), 1.0)], &mut s, &mut bag);
        m.learn(&bag, CLASSES[c], 1.0).unwrap();
    }
    m
}

fn bench(c: &mut Criterion) {
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let model = trained(&analyzer, &settings);
    let records = dataset(10_000, 2);
    let mean_len = records.iter().map(|r| r.0.len()).sum::<usize>() as f64 / records.len() as f64;
    eprintln!("mean record length {mean_len:.1} bytes, vocabulary {} terms", model.vocabulary_size());

    let mut g = c.benchmark_group("core");
    g.throughput(Throughput::Elements(records.len() as u64));
    g.bench_function("analyze_only", |b| {
        let mut s = AnalyzerScratch::default();
        let mut bag = TermBag::new();
        b.iter(|| {
            let mut n = 0;
            for (text, _) in &records {
                analyzer.analyze_fields([(text.as_str(), 1.0)], &mut s, &mut bag);
                n += bag.len();
            }
            n
        })
    });
    g.bench_function("analyze_and_score", |b| {
        let mut s = AnalyzerScratch::default();
        let mut bag = TermBag::new();
        let mut sc = ScoreScratch::default();
        b.iter(|| {
            let mut hits = 0usize;
            for (text, _) in &records {
                analyzer.analyze_fields([(text.as_str(), 1.0)], &mut s, &mut bag);
                hits += model.score(&bag, &mut sc).best;
            }
            hits
        })
    });
    g.bench_function("analyze_score_and_explain", |b| {
        let mut s = AnalyzerScratch::default();
        let mut bag = TermBag::new();
        let mut sc = ScoreScratch::default();
        b.iter(|| {
            let mut n = 0usize;
            for (text, _) in &records {
                analyzer.analyze_fields([(text.as_str(), 1.0)], &mut s, &mut bag);
                let r = model.score(&bag, &mut sc);
                n += model.explain(&bag, &sc, &r, 3).len();
            }
            n
        })
    });
    g.bench_function("analyze_and_learn", |b| {
        let mut s = AnalyzerScratch::default();
        let mut bag = TermBag::new();
        b.iter_batched_ref(
            || model.clone(),
            |m| {
                for (text, c) in &records {
                    analyzer.analyze_fields([(text.as_str(), 1.0)], &mut s, &mut bag);
                    m.learn(&bag, CLASSES[*c], 1.0).unwrap();
                }
            },
            BatchSize::LargeInput,
        )
    });
    g.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(30).measurement_time(std::time::Duration::from_secs(4));
    targets = bench
}
criterion_main!(benches);
