//! Publish cost: what the learner pays to hand scorers a fresh read-only model view (`Model::clone()`), and the learning that follows it.
//!
//! Run: `cargo bench --bench publish`.
//!
//! Two models: 1,000,000 terms × 20 classes and 5,000 terms × 8 classes, built by
//! learning synthetic terms (`term0000000`, …) in id order. The learner's work per
//! publish at 10,000 labels/s and one publish every 500 ms is one `clone()` (the view
//! it publishes) and 5,000 `learn`s into the working model while that view is alive,
//! then the previous view is dropped. Records have 20 terms: 19 drawn by a Zipf law
//! (s = 1) over the vocabulary ranks (frequent terms were seen first, so they have low
//! ids), and, for one record in five, a term the model has never seen (vocabulary growth).
//! `uniform` draws the 19 terms uniformly instead: the worst case for a copy-on-write
//! layout, because it touches rows all over the model.
//!
//! Benchmarks:
//! - `publish/clone/<size>`: `clone()` alone (and the drop of the clone);
//! - `publish/learn_5000/<size>`: 5,000 learns with no view alive (the learning itself);
//! - `publish/clone_learn_5000_zipf/<size>`, `…_uniform/<size>`: one full publish cycle;
//! - `publish/flat_copy/<size>`: a reference, the copy of the same data laid out flat
//!   (two rows × K `Vec<f64>`, a row-total `Vec<f64>`, the terms as `Vec<Box<str>>` and
//!   an `FxHashMap<Box<str>, u32>`), i.e. what a full model copy moves;
//! - `score_large/score/<size>`: scoring 20-term Zipf records against the model, the
//!   hot path on a large vocabulary.

#[path = "support/synthetic_model.rs"]
mod synthetic_model;
use synthetic_model::synthetic_model;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use rustc_hash::FxHashMap;
use sieveline::eval::folds::SplitMix64;
use sieveline::model::{Model, ScoreScratch};
use sieveline::text::TermBag;

const BATCH: usize = 5_000;
const TERMS_PER_RECORD: usize = 19;

struct Setup {
    label: &'static str,
    terms: usize,
    classes: usize,
}

/// The two sizes; under `cargo test` (criterion's test mode, no `--bench`) the large one
/// shrinks to 20,000 terms so the smoke run stays quick.
fn setups() -> [Setup; 2] {
    let full = std::env::args().any(|a| a == "--bench");
    [
        if full {
            Setup { label: "1M_x_20", terms: 1_000_000, classes: 20 }
        } else {
            Setup { label: "20k_x_20", terms: 20_000, classes: 20 }
        },
        Setup { label: "5k_x_8", terms: 5_000, classes: 8 },
    ]
}

/// The model: every term learned once, 100 terms a record, classes in rotation.
fn build(setup: &Setup) -> (Model, Vec<String>, Vec<String>) {
    synthetic_model(setup.terms, setup.classes)
}

/// Cumulative Zipf (s = 1) weights over `n` ranks.
fn zipf_cdf(n: usize) -> Vec<f64> {
    let mut acc = 0.0;
    let mut cdf: Vec<f64> = (0..n)
        .map(|r| {
            acc += 1.0 / (r as f64 + 1.0);
            acc
        })
        .collect();
    for v in &mut cdf {
        *v /= acc;
    }
    cdf
}

/// Term ids of `BATCH` records; `None` marks a fresh, never-seen term.
fn batch(rng: &mut SplitMix64, cdf: Option<&[f64]>, n: usize) -> Vec<Vec<Option<u32>>> {
    (0..BATCH)
        .map(|_| {
            let mut rec: Vec<Option<u32>> = (0..TERMS_PER_RECORD)
                .map(|_| {
                    Some(match cdf {
                        Some(cdf) => {
                            let u = rng.unit();
                            cdf.partition_point(|&c| c < u).min(n - 1) as u32
                        }
                        None => rng.below(n as u64) as u32,
                    })
                })
                .collect();
            if rng.below(5) == 0 {
                rec.push(None);
            }
            rec
        })
        .collect()
}

/// Learn one batch; fresh terms take the next unused name from `fresh`.
fn learn_batch(m: &mut Model, names: &[String], classes: &[String], recs: &[Vec<Option<u32>>], fresh: &mut usize, bag: &mut TermBag) {
    for (i, rec) in recs.iter().enumerate() {
        bag.clear();
        for t in rec {
            match t {
                Some(id) => bag.push(&names[*id as usize], 1.0),
                None => {
                    bag.push(&format!("fresh{:09}", *fresh), 1.0);
                    *fresh += 1;
                }
            }
        }
        m.learn(bag, &classes[i % classes.len()], 1.0).unwrap();
    }
}

/// The same amount of data as the model, laid out flat, as the old full copy moved it.
/// Its fields are only ever copied, never read.
#[allow(dead_code)]
#[derive(Clone)]
struct Flat {
    counts: Vec<f64>,
    logw: Vec<f64>,
    totals: Vec<f64>,
    terms: Vec<Box<str>>,
    map: FxHashMap<Box<str>, u32>,
}

fn flat(names: &[String], k: usize) -> Flat {
    let terms: Vec<Box<str>> = names.iter().map(|n| n.as_str().into()).collect();
    let map = terms.iter().enumerate().map(|(i, t)| (t.clone(), i as u32)).collect();
    Flat { counts: vec![1.0; names.len() * k], logw: vec![0.5; names.len() * k], totals: vec![1.0; names.len()], terms, map }
}

fn bench(c: &mut Criterion) {
    for setup in &setups() {
        let started = std::time::Instant::now();
        let (model, names, classes) = build(setup);
        eprintln!("{}: built in {:.2}s", setup.label, started.elapsed().as_secs_f64());
        let cdf = zipf_cdf(setup.terms);
        let mut rng = SplitMix64::new(7);
        let zipf = batch(&mut rng, Some(&cdf), setup.terms);
        let uniform = batch(&mut rng, None, setup.terms);

        let mut g = c.benchmark_group("publish");
        g.sample_size(10);
        g.warm_up_time(std::time::Duration::from_secs(1));
        g.measurement_time(std::time::Duration::from_secs(if setup.terms > 100_000 { 12 } else { 4 }));

        g.bench_function(format!("clone/{}", setup.label), |b| b.iter(|| model.clone()));

        let reference = flat(&names, setup.classes);
        g.bench_function(format!("flat_copy/{}", setup.label), |b| b.iter(|| reference.clone()));
        drop(reference);

        let mut fresh = 0usize;
        let mut bag = TermBag::new();
        g.bench_function(format!("learn_5000/{}", setup.label), |b| {
            let mut working = model.clone();
            b.iter(|| learn_batch(&mut working, &names, &classes, &zipf, &mut fresh, &mut bag))
        });
        for (kind, recs) in [("zipf", &zipf), ("uniform", &uniform)] {
            g.bench_function(format!("clone_learn_5000_{kind}/{}", setup.label), |b| {
                let mut working = model.clone();
                let mut previous: Option<Model> = None;
                b.iter(|| {
                    let view = working.clone();
                    learn_batch(&mut working, &names, &classes, recs, &mut fresh, &mut bag);
                    // The scorers let go of the view before last.
                    previous.replace(view)
                })
            });
        }
        g.finish();

        let mut g = c.benchmark_group("score_large");
        g.throughput(Throughput::Elements(BATCH as u64));
        g.sample_size(20);
        let bags: Vec<TermBag> = zipf
            .iter()
            .map(|rec| {
                let mut bag = TermBag::new();
                for t in rec {
                    match t {
                        Some(id) => bag.push(&names[*id as usize], 1.0),
                        None => bag.push("never-seen", 1.0),
                    }
                }
                bag
            })
            .collect();
        g.bench_function(format!("score/{}", setup.label), |b| {
            let mut sc = ScoreScratch::default();
            b.iter_batched_ref(
                || (),
                |_| bags.iter().map(|bag| model.score(bag, &mut sc).best).sum::<usize>(),
                BatchSize::SmallInput,
            )
        });
        g.finish();
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
