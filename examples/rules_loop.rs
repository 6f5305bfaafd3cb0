//! Profiling aid for the rules bench: the Banking77 test records (Casanueva et al. 2020, CC BY 4.0) analyzed and decided R times (argv 1, default 3), model only or with the 200 generated rules of `benches/rules.rs` (argv 2: `setup`, `model`, `norules` (the decider without rules), `rules`, `match`; `pair` times model and rules passes alternately). Run under `valgrind --tool=callgrind` (`scripts/profile-rules.sh`) for instruction counts that do not depend on machine load.

#[path = "../benches/support/rules_gen.rs"]
mod rules_gen;

use sieveline::decide::{decide_by_model, DecideScratch, Decider, ReviewPolicy};
use sieveline::rules::{BlendScratch, FieldText};
use sieveline::settings::BlendMode;
use sieveline::text::{AnalyzerScratch, TermBag};

fn main() {
    let rounds: usize = std::env::args().nth(1).and_then(|s| s.parse().ok()).unwrap_or(3);
    let mode = std::env::args().nth(2).unwrap_or_else(|| "rules".into());
    let rules_gen::Setup { test, settings, analyzer, model, set, .. } = rules_gen::setup();
    let policy = ReviewPolicy::from_settings(&settings.review);
    let decider = Decider { blend: BlendMode::ModelFirst, ..Decider::from_settings(&settings) };
    let mut asc = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    let mut ds = DecideScratch::default();
    let mut s = BlendScratch::default();
    if mode == "pair" {
        // Wall time, the two passes alternating (load changes hit both alike).
        let (mut a, mut b) = (Vec::new(), Vec::new());
        for _ in 0..rounds {
            let t = std::time::Instant::now();
            for (text, _) in &test {
                analyzer.analyze_fields([(text.as_str(), 1.0)], &mut asc, &mut bag);
                std::hint::black_box(decide_by_model(&model, "v", None, &bag, &policy, 3, &mut ds));
            }
            a.push(t.elapsed().as_secs_f64());
            let t = std::time::Instant::now();
            for (text, _) in &test {
                let f = [FieldText { field: 0, text, weight: 1.0 }];
                std::hint::black_box(decider.decide(&analyzer, Some(&set), Some(&model), "v", None, &f, &mut s));
            }
            b.push(t.elapsed().as_secs_f64());
        }
        a.sort_by(f64::total_cmp);
        b.sort_by(f64::total_cmp);
        let (ma, mb) = (a[a.len() / 2], b[b.len() / 2]);
        eprintln!("pair: model {:.3} ms, rules {:.3} ms per pass (medians of {rounds}); ratio {:.3}", ma * 1e3, mb * 1e3, ma / mb);
        return;
    }
    if mode == "parts" {
        // Wall time of the parts, alternating: analyze; + match; + model decision; the decider without and with rules;
        // analyze, match and the model decision without the blend (how much the blend adds to matching).
        let mut times = vec![Vec::new(); 6];
        for _ in 0..rounds {
            for (p, v) in times.iter_mut().enumerate() {
                let t = std::time::Instant::now();
                for (text, _) in &test {
                    let f = [FieldText { field: 0, text, weight: 1.0 }];
                    match p {
                        0 => s.terms.analyze(&analyzer, &f, &mut s.analyzer),
                        1 => {
                            s.terms.analyze(&analyzer, &f, &mut s.analyzer);
                            std::hint::black_box(set.matches(&s.terms, &f, &mut s.work.rules));
                        }
                        2 => {
                            s.terms.analyze(&analyzer, &f, &mut s.analyzer);
                            std::hint::black_box(decide_by_model(&model, "v", None, &s.terms.bag, &policy, 3, &mut ds));
                        }
                        3 => {
                            std::hint::black_box(decider.decide(&analyzer, None, Some(&model), "v", None, &f, &mut s));
                        }
                        5 => {
                            s.terms.analyze(&analyzer, &f, &mut s.analyzer);
                            std::hint::black_box(set.matches(&s.terms, &f, &mut s.work.rules));
                            std::hint::black_box(decide_by_model(&model, "v", None, &s.terms.bag, &policy, 3, &mut ds));
                        }
                        _ => {
                            std::hint::black_box(decider.decide(&analyzer, Some(&set), Some(&model), "v", None, &f, &mut s));
                        }
                    }
                }
                v.push(t.elapsed().as_secs_f64() * 1e6 / test.len() as f64);
            }
        }
        let med: Vec<f64> = times.into_iter().map(|mut v| { v.sort_by(f64::total_cmp); v[v.len() / 2] }).collect();
        eprintln!(
            "parts (µs per record, medians of {rounds}): analyze {:.3}, +match {:.3}, +model decision {:.3}; decider without rules {:.3}, with rules {:.3}; ratio {:.3}; analyze+match+model decision, no blend {:.3}",
            med[0], med[1] - med[0], med[2] - med[0], med[3], med[4], med[2] / med[4], med[5]
        );
        return;
    }
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
                "norules" => acc += decider.decide(&analyzer, None, Some(&model), "v", None, &f, &mut s).class.len(),
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
