//! Rules speed: analyze + decide on the Banking77 test records (Casanueva et al. 2020, CC BY 4.0) with a 77-class model, model only against 200 rules blended in, in the same criterion run.
//!
//! The blend runs in `model_first`, so every record is scored by the model
//! and matched against all 200 rules (no rule short-cuts the model). Two
//! generated sets, same seed and shape (any/all/none conditions, 10 raw
//! regexes, assign, boost and review actions): one draws its terms from the
//! 600 most frequent training terms, so about 8 rules fire on every record
//! (the worst case); the other draws each rule's terms from its class's
//! distinctive terms, as people write rules. Goal: blended throughput at
//! least 0.7 × model only.
//!
//! Run: `SIEVELINE_DATA_DIR=../shared/data cargo bench --bench rules`.

#[path = "support/rules_gen.rs"]
mod rules_gen;
use rules_gen::{setup, Setup};

use std::hint::black_box;
use std::time::Instant;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use sieveline::decide::{decide_by_model, DecideScratch, DecideWork, Decider, ReviewPolicy};
use sieveline::rules::{BlendScratch, FieldText, RecordTerms, RuleSet};
use sieveline::settings::BlendMode;
use sieveline::text::{AnalyzerScratch, TermBag};

fn bench(c: &mut Criterion) {
    let Setup { test, settings, analyzer, model, set, distinctive } = setup();
    let policy = ReviewPolicy::from_settings(&settings.review);
    let decider = Decider { blend: BlendMode::ModelFirst, ..Decider::from_settings(&settings) };
    let n = test.len() as u64;

    // How often the rules fire, so each figure is read with the load it carries.
    for (name, rs) in [("200 rules over frequent terms (worst case)", &set), ("200 rules over distinctive terms", &distinctive)] {
        let mut s = BlendScratch::default();
        let (mut fired, mut touched) = (0usize, 0usize);
        for (t, _) in &test {
            let f = [FieldText { field: 0, text: t, weight: 1.0 }];
            s.terms.analyze(&analyzer, &f, &mut s.analyzer);
            let k = rs.matches(&s.terms, &f, &mut s.work.rules).len();
            fired += k;
            touched += usize::from(k > 0);
        }
        eprintln!(
            "{name}, {} indexed terms: {:.2} rules fire per record on average; {:.1}% of records fire one or more",
            rs.indexed_terms(),
            fired as f64 / n as f64,
            100.0 * touched as f64 / n as f64
        );
    }

    // One pass over the test file each way; the criterion benches and the
    // paired measurement below run exactly these.
    let model_pass = |asc: &mut AnalyzerScratch, bag: &mut TermBag, ds: &mut DecideScratch| {
        let mut k = 0usize;
        for (t, _) in &test {
            analyzer.analyze_fields([(t.as_str(), 1.0)], asc, bag);
            let (d, _) = decide_by_model(&model, "v", None, bag, &policy, 3, ds);
            k += d.class.len();
        }
        k
    };
    let blend_pass = |rules: Option<&RuleSet>, s: &mut BlendScratch| {
        let mut k = 0usize;
        for (t, _) in &test {
            let f = [FieldText { field: 0, text: t, weight: 1.0 }];
            let d = decider.decide(&analyzer, rules, Some(&model), "v", None, &f, s);
            k += d.class.len();
        }
        k
    };

    // Paired: the passes alternate (model only, the same through the decider
    // with no rules, 200 rules), so a change in machine load hits all alike;
    // criterion below measures one after the other. The first round warms up.
    {
        let (mut asc, mut bag, mut ds) = (AnalyzerScratch::default(), TermBag::new(), DecideScratch::default());
        let (mut s0, mut s1, mut s2) = (BlendScratch::default(), BlendScratch::default(), BlendScratch::default());
        let mut t: [Vec<f64>; 4] = Default::default();
        for round in 0..61 {
            let mut time = |i: usize, f: &mut dyn FnMut() -> usize| {
                let start = Instant::now();
                black_box(f());
                if round > 0 {
                    t[i].push(start.elapsed().as_secs_f64() * 1e3);
                }
            };
            // The order rotates, so no pass always follows the same one.
            for k in 0..4 {
                match (round + k) % 4 {
                    0 => time(0, &mut || model_pass(&mut asc, &mut bag, &mut ds)),
                    1 => time(1, &mut || blend_pass(None, &mut s0)),
                    2 => time(2, &mut || blend_pass(Some(&set), &mut s1)),
                    _ => time(3, &mut || blend_pass(Some(&distinctive), &mut s2)),
                }
            }
        }
        let m: Vec<f64> = t
            .iter_mut()
            .map(|v| {
                v.sort_by(f64::total_cmp);
                v[v.len() / 2]
            })
            .collect();
        eprintln!(
            "paired, 60 rounds in rotating order, median ms per pass: model only {:.2}, via the decider without rules {:.2} ({:.3}x), 200 rules over frequent terms {:.2}, 200 rules over distinctive terms {:.2}; rules/model throughput: worst case {:.3}, distinctive {:.3}",
            m[0],
            m[1],
            m[0] / m[1],
            m[2],
            m[3],
            m[0] / m[2],
            m[0] / m[3]
        );
    }

    let mut g = c.benchmark_group("rules");
    g.throughput(Throughput::Elements(n));
    g.bench_function("analyze+decide/model_only", |b| {
        let (mut asc, mut bag, mut ds) = (AnalyzerScratch::default(), TermBag::new(), DecideScratch::default());
        b.iter(|| model_pass(&mut asc, &mut bag, &mut ds))
    });
    // The service's path with no rules file: the same decider, no rule set.
    g.bench_function("analyze+decide/model_only_via_decider", |b| {
        let mut s = BlendScratch::default();
        b.iter(|| blend_pass(None, &mut s))
    });
    g.bench_function("analyze+decide/200_rules_model_first", |b| {
        let mut s = BlendScratch::default();
        b.iter(|| blend_pass(Some(&set), &mut s))
    });
    g.bench_function("analyze+decide/200_distinctive_rules_model_first", |b| {
        let mut s = BlendScratch::default();
        b.iter(|| blend_pass(Some(&distinctive), &mut s))
    });
    // The same without analysis: records analyzed once up front, so the rules' share is not diluted.
    let pre: Vec<RecordTerms> = test
        .iter()
        .map(|(t, _)| {
            let mut r = RecordTerms::new();
            r.analyze(&analyzer, &[FieldText { field: 0, text: t, weight: 1.0 }], &mut AnalyzerScratch::default());
            r
        })
        .collect();
    g.bench_function("decide/model_only", |b| {
        let mut ds = DecideScratch::default();
        b.iter(|| {
            let mut k = 0usize;
            for r in &pre {
                let (d, _) = decide_by_model(&model, "v", None, &r.bag, &policy, 3, &mut ds);
                k += d.class.len();
            }
            k
        })
    });
    g.bench_function("decide/200_rules_model_first", |b| {
        let mut w = DecideWork::default();
        b.iter(|| {
            let mut k = 0usize;
            for (r, (t, _)) in pre.iter().zip(&test) {
                let f = [FieldText { field: 0, text: t, weight: 1.0 }];
                let d = decider.decide_analyzed(Some(&set), Some(&model), "v", None, &f, r, &mut w);
                k += d.class.len();
            }
            k
        })
    });
    // The matcher alone, for where the time goes.
    g.bench_function("match_only/200_rules", |b| {
        let mut ms = sieveline::rules::MatchScratch::default();
        b.iter(|| {
            let mut k = 0usize;
            for (r, (t, _)) in pre.iter().zip(&test) {
                let f = [FieldText { field: 0, text: t, weight: 1.0 }];
                k += set.matches(r, &f, &mut ms).len();
            }
            k
        })
    });
    g.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(5));
    targets = bench
}
criterion_main!(benches);
