//! Profiling aid for publishing model views: on a 1M-term × 20-class model, time or count (under valgrind) cloning, learning and scoring, one mode at a time.
//!
//! `publish_loop MODE [TERMS] [ROUNDS]`, MODE one of:
//! - `base`: build the model and the records only (subtract it from the others);
//! - `clone`: ROUNDS × (clone, drop the clone);
//! - `learn`: ROUNDS × learn 5,000 records, no view alive;
//! - `cycle`: ROUNDS × (clone = publish a view, learn 5,000 records, drop the previous view);
//! - `score`: ROUNDS × score 5,000 records.
//!
//! Records have 19 terms drawn by a Zipf law (s = 1) over the vocabulary ranks, and one
//! record in five a never-seen term, as in `benches/publish.rs`. Under
//! `valgrind --tool=cachegrind --cache-sim=yes` the instruction and cache-miss counts do not
//! depend on machine load.

#[path = "../benches/support/synthetic_model.rs"]
mod synthetic_model;
use synthetic_model::synthetic_model;

use sieveline::eval::folds::SplitMix64;
use sieveline::model::{Model, ScoreScratch};
use sieveline::text::TermBag;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let mode = args.get(1).cloned().unwrap_or_else(|| "cycle".into());
    let terms: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(1_000_000);
    let rounds: usize = args.get(3).and_then(|s| s.parse().ok()).unwrap_or(3);
    let (mut m, names, classes) = synthetic_model(terms, 20);
    let mut acc = 0.0;
    let cdf: Vec<f64> = names.iter().enumerate().map(|(r, _)| { acc += 1.0 / (r as f64 + 1.0); acc }).collect();
    let mut rng = SplitMix64::new(7);
    let records: Vec<TermBag> = (0..rounds * 5_000)
        .map(|i| {
            let mut b = TermBag::new();
            for _ in 0..19 {
                let u = rng.unit() * acc;
                b.push(&names[cdf.partition_point(|&c| c < u).min(terms - 1)], 1.0);
            }
            if rng.below(5) == 0 {
                b.push(&format!("fresh{i:09}"), 1.0);
            }
            b
        })
        .collect();
    let started = std::time::Instant::now();
    let mut sink = 0usize;
    match mode.as_str() {
        "base" => {}
        "clone" => {
            for _ in 0..rounds {
                sink += m.clone().rows();
            }
        }
        "learn" | "cycle" => {
            let mut previous: Option<Model> = None;
            for (i, batch) in records.chunks(5_000).enumerate() {
                let view = (mode == "cycle").then(|| m.clone());
                for (j, b) in batch.iter().enumerate() {
                    m.learn(b, &classes[(i + j) % 20], 1.0).unwrap();
                }
                if let Some(v) = view {
                    sink += previous.replace(v).map_or(0, |p| p.rows());
                }
            }
        }
        "score" => {
            let mut s = ScoreScratch::default();
            for batch in records.chunks(5_000) {
                for b in batch {
                    sink += m.score(b, &mut s).best;
                }
            }
        }
        other => panic!("unknown mode {other}"),
    }
    println!("{mode}: {rounds} rounds in {:.3}s ({sink})", started.elapsed().as_secs_f64());
}
