//! Rules speed: analyze + decide on the Banking77 test records (Casanueva et al. 2020, CC BY 4.0) with a 77-class model, model only against 200 rules blended in, in the same criterion run.
//!
//! The blend runs in `model_first`, so every record is scored by the model
//! and matched against all 200 rules (the worst case: no rule short-cuts the
//! model). The 200 rules are generated from frequent training terms with a
//! fixed seed: any/all/none conditions, 10 raw regexes, assign, boost and
//! review actions. Goal: blended throughput at least 0.7 × model only.
//!
//! Run: `SIEVELINE_DATA_DIR=../shared/data cargo bench --bench rules`.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use sieveline::decide::{decide_by_model, DecideScratch, DecideWork, Decider, ReviewPolicy};
use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams};
use sieveline::rules::{self, BlendScratch, FieldText, RecordTerms, RuleSet};
use sieveline::settings::{BlendMode, Settings};
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

fn data_dir() -> PathBuf {
    let dir = std::env::var_os("SIEVELINE_DATA_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/data"));
    let b = dir.join("banking77");
    assert!(b.join("train.csv").is_file(), "Banking77 is missing at {} (set SIEVELINE_DATA_DIR)", b.display());
    b
}

fn read(path: &Path) -> Vec<(String, String)> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records().map(|x| x.unwrap()).map(|x| (x[0].to_string(), x[1].to_string())).collect()
}

/// 200 rules over frequent training terms; seeded, so every run loads the same set.
pub fn generated_rules(terms: &[String], classes: &[String], n: usize, seed: u64) -> String {
    let mut rng = SplitMix64::new(seed);
    let mut pick = |k: usize| -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        while out.len() < k {
            let t = &terms[rng.below(terms.len() as u64) as usize];
            if !out.contains(t) {
                out.push(t.clone());
            }
        }
        out
    };
    let list = |v: &[String]| v.iter().map(|t| format!("{t:?}")).collect::<Vec<_>>().join(", ");
    let mut s = String::new();
    for i in 0..n {
        let class = &classes[i % classes.len()];
        let (action, extra) = match i % 10 {
            0..=5 => ("assign", String::new()),
            6..=8 => ("boost", format!("log_odds = {:.1}\n", 0.5 + (i % 7) as f64 * 0.5)),
            _ => ("review", String::new()),
        };
        s += &format!(
            "[[rule]]\nid = \"gen-{i}\"\nclass = \"{class}\"\naction = \"{action}\"\n{extra}priority = {}\n",
            i % 5
        );
        let any = pick(2 + i % 4);
        s += &format!("[[rule.when]]\nany = [{}]\n", list(&any));
        if i % 4 == 0 {
            s += &format!("[[rule.when]]\nall = [{}]\n", list(&pick(2)));
        }
        if i % 5 == 0 {
            s += &format!("[[rule.when]]\nnone = [{}]\n", list(&pick(2)));
        }
        if i % 20 == 0 {
            let t = &pick(1)[0];
            s += &format!("[[rule.when]]\nregex = '(?i)\\b{}\\w*\\b'\n", regex_escape(t));
        }
    }
    s
}

fn regex_escape(t: &str) -> String {
    t.chars().map(|c| if c.is_alphanumeric() { c.to_string() } else { format!("\\{c}") }).collect()
}

fn bench(c: &mut Criterion) {
    let dir = data_dir();
    let train = read(&dir.join("train.csv"));
    let test = read(&dir.join("test.csv"));
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let mut classes: Vec<String> = train.iter().map(|(_, c)| c.clone()).collect();
    classes.sort();
    classes.dedup();
    let mut model = Model::new(
        NbParams::multinomial(1.0),
        settings.analyzer.clone(),
        classes.clone(),
        Vocabulary::new(settings.model.vocabulary, settings.model.max_vocabulary, settings.model.hash_buckets),
    )
    .unwrap();
    let mut bag = TermBag::new();
    let mut asc = AnalyzerScratch::default();
    let mut freq: HashMap<String, usize> = HashMap::new();
    for (text, class) in &train {
        analyzer.analyze_fields([(text.as_str(), 1.0)], &mut asc, &mut bag);
        for (t, _) in bag.iter() {
            *freq.entry(t.to_string()).or_default() += 1;
        }
        model.learn(&bag, class, 1.0).unwrap();
    }
    // Frequent plain words (class tokens excluded): rules that really fire.
    let mut terms: Vec<(String, usize)> = freq.into_iter().filter(|(t, _)| !t.starts_with('<')).collect();
    terms.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
    let terms: Vec<String> = terms.into_iter().take(600).map(|(t, _)| t).collect();
    let text = generated_rules(&terms, &classes, 200, 7);
    let set: RuleSet = rules::from_str(&text, "generated-200", &analyzer, &["text".into()]).unwrap();
    assert_eq!(set.len(), 200);
    let policy = ReviewPolicy::from_settings(&settings.review);
    let decider = Decider { blend: BlendMode::ModelFirst, ..Decider::from_settings(&settings) };
    let n = test.len() as u64;

    // How often the rules fire, so the figure is read with the load it carries.
    let mut s = BlendScratch::default();
    let mut fired = 0usize;
    for (t, _) in &test {
        let f = [FieldText { field: 0, text: t, weight: 1.0 }];
        s.terms.analyze(&analyzer, &f, &mut s.analyzer);
        fired += set.matches(&s.terms, &f, &mut s.work.rules).len();
    }
    eprintln!(
        "200 rules, {} indexed terms: {:.2} rules fire per record on average",
        set.indexed_terms(),
        fired as f64 / n as f64
    );

    let mut g = c.benchmark_group("rules");
    g.throughput(Throughput::Elements(n));
    g.bench_function("analyze+decide/model_only", |b| {
        let mut asc = AnalyzerScratch::default();
        let mut bag = TermBag::new();
        let mut ds = DecideScratch::default();
        b.iter(|| {
            let mut k = 0usize;
            for (t, _) in &test {
                analyzer.analyze_fields([(t.as_str(), 1.0)], &mut asc, &mut bag);
                let (d, _) = decide_by_model(&model, "v", None, &bag, &policy, 3, &mut ds);
                k += d.class.len();
            }
            k
        })
    });
    g.bench_function("analyze+decide/200_rules_model_first", |b| {
        let mut s = BlendScratch::default();
        b.iter(|| {
            let mut k = 0usize;
            for (t, _) in &test {
                let f = [FieldText { field: 0, text: t, weight: 1.0 }];
                let d = decider.decide(&analyzer, Some(&set), Some(&model), "v", None, &f, &mut s);
                k += d.class.len();
            }
            k
        })
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
