//! Peak resident memory of a model with a 1,000,000-term vocabulary and 20 classes, and of publishing read-only views of it while learning.
//!
//! Run: `cargo bench --bench memory`. Under `cargo test` it runs a 10,000-term smoke version.
//! Prints VmHWM (peak RSS) from /proc/self/status before and after building the model, then
//! after 10 publish cycles: each keeps a `clone()` of the model alive (the published view)
//! while the model learns 5,000 records of 20 terms, then drops the previous view.

use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams};
use sieveline::settings::{Settings, VocabularyKind};
use sieveline::text::TermBag;

fn peak_rss_kib() -> u64 {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(0)
}

fn main() {
    let full = std::env::args().any(|a| a == "--bench");
    let terms: usize = if full { 1_000_000 } else { 10_000 };
    let classes: Vec<String> = (0..20).map(|i| format!("class{i:02}")).collect();
    let before = peak_rss_kib();
    let settings = Settings::defaults();
    let mut m = Model::new(
        NbParams::multinomial(1.0),
        settings.analyzer,
        classes.clone(),
        Vocabulary::new(VocabularyKind::Interned, 2_000_000, 0),
    )
    .unwrap();
    let mut bag = TermBag::new();
    let started = std::time::Instant::now();
    for chunk in 0..terms / 100 {
        bag.clear();
        for j in 0..100 {
            bag.push(&format!("term{:07}", chunk * 100 + j), 1.0);
        }
        m.learn(&bag, &classes[chunk % 20], 1.0).unwrap();
    }
    let after = peak_rss_kib();
    assert_eq!(m.vocabulary_size(), terms);
    println!(
        "model with {terms} terms x 20 classes: peak RSS {:.1} MiB (baseline {:.1} MiB), built in {:.2}s; snapshot would be {:.1} MiB",
        after as f64 / 1024.0,
        before as f64 / 1024.0,
        started.elapsed().as_secs_f64(),
        (terms * 20 * 8 + terms * 16) as f64 / 1_048_576.0
    );

    // Publish cycles: terms drawn uniformly over the vocabulary (the worst case for
    // sharing), one record in five with a new term.
    let mut rng = SplitMix64::new(11);
    let mut previous: Option<Model> = None;
    let mut fresh = 0usize;
    let started = std::time::Instant::now();
    for _ in 0..10 {
        let view = m.clone();
        for r in 0..5_000 {
            bag.clear();
            for _ in 0..19 {
                bag.push(&format!("term{:07}", rng.below(terms as u64)), 1.0);
            }
            if r % 5 == 0 {
                bag.push(&format!("fresh{fresh:07}"), 1.0);
                fresh += 1;
            }
            m.learn(&bag, &classes[r % 20], 1.0).unwrap();
        }
        previous = Some(view);
    }
    drop(previous);
    println!(
        "after 10 publish cycles (a view alive while 5,000 records are learned): peak RSS {:.1} MiB, {:.2}s",
        peak_rss_kib() as f64 / 1024.0,
        started.elapsed().as_secs_f64()
    );
}
