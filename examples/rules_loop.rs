//! Profiling aid for the rules bench: the Banking77 test records (Casanueva et al. 2020, CC BY 4.0) analyzed and decided R times (argv 1, default 3), model only or with the 200 generated rules of `benches/rules.rs` (argv 2: `setup`, `model`, `rules`, `match`). Run under `valgrind --tool=callgrind` (`scripts/profile-rules.sh`) for instruction counts that do not depend on machine load.

#[path = "../benches/support/rules_gen.rs"]
mod rules_gen;

use sieveline::decide::{decide_by_model, DecideScratch, Decider, ReviewPolicy};
use sieveline::rules::{BlendScratch, FieldText};
use sieveline::settings::BlendMode;
use sieveline::text::{AnalyzerScratch, TermBag};

fn main() {
    let rounds: usize = std::env::args().nth(1).and_then(|s| s.parse().ok()).unwrap_or(3);
    let mode = std::env::args().nth(2).unwrap_or_else(|| "rules".into());
    let rules_gen::Setup { test, settings, analyzer, model, set } = rules_gen::setup();
    let policy = ReviewPolicy::from_settings(&settings.review);
    let decider = Decider { blend: BlendMode::ModelFirst, ..Decider::from_settings(&settings) };
    let mut asc = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    let mut ds = DecideScratch::default();
    let mut s = BlendScratch::default();
    let t = std::time::Instant::now();
    let mut acc = 0usize;
    for _ in 0..rounds {
        for (text, _) in &test {
            let f = [FieldText { field: 0, text, weight: 1.0 }];
            match mode.as_str() {
                "setup" => acc += text.len(),
                "model" => {
                    analyzer.analyze_fields([(text.as_str(), 1.0)], &mut asc, &mut bag);
                    acc += decide_by_model(&model, "v", None, &bag, &policy, 3, &mut ds).0.class.len();
                }
                "match" => {
                    s.terms.analyze(&analyzer, &f, &mut s.analyzer);
                    acc += set.matches(&s.terms, &f, &mut s.work.rules).len();
                }
                _ => acc += decider.decide(&analyzer, Some(&set), Some(&model), "v", None, &f, &mut s).class.len(),
            }
        }
    }
    let n = rounds * test.len();
    eprintln!("{mode}: {n} records in {:.3}s ({:.0}/s) [{acc}]", t.elapsed().as_secs_f64(), n as f64 / t.elapsed().as_secs_f64());
}
