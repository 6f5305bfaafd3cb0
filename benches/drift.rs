//! Drift bookkeeping cost: the record loop's per-record work (decode, analyze, score, build the output) with the drift observer off and on, side by side in one criterion run, on the committed demo streams (invented scenario).
//!
//! "off" is `Router::route` alone; "on" adds `DecisionObserver::observe` with
//! the default `[drift]` settings (window 2,000 records, a summary into the
//! gauges every 250 records, which is included). Goal: on ≤ 1.05 × off.
//! The model is trained on the phase-1 records with their true classes; the
//! stream is all three phases, so the class mix moves and reviews happen.
//!
//! Run: `cargo bench --bench drift`. Besides criterion's figures, the bench
//! ends with a paired measurement that is robust to other load on the machine:
//! 41 rounds, each timing one pass over the stream with the observer off and
//! one with it on (alternating which goes first), then the medians of the
//! per-record times and the median of the per-round ratios on / off.

use std::sync::Arc;
use std::time::Instant;

use criterion::{criterion_group, Criterion, Throughput};
use sieveline::metrics::Metrics;
use sieveline::runtime::model_view::{ModelHandle, ModelView};
use sieveline::runtime::monitor::{DecisionObserver, DriftMonitor};
use sieveline::runtime::router::{RouteScratch, Router};

#[path = "support/drift_data.rs"]
mod drift_data;
use drift_data::{inbound, streams, Stream};

fn bench_stream(c: &mut Criterion, s: &Stream) {
    let router = Router::new(&s.settings).unwrap();
    let handle = ModelHandle::new(ModelView::new(
        s.view.model.clone(),
        s.view.meta.clone(),
        s.view.checksum.clone(),
        s.view.source.clone(),
    ));
    let view = handle.current();
    let monitor =
        Arc::new(DriftMonitor::new(&s.settings.drift, &s.settings.status_page, Arc::new(Metrics::new()), handle.clone()));
    let mut g = c.benchmark_group(format!("drift_{}", s.name));
    g.throughput(Throughput::Elements(s.lines.len() as u64));
    g.bench_function("route/drift_off", |b| {
        let mut scratch = RouteScratch::default();
        b.iter(|| {
            for (i, l) in s.lines.iter().enumerate() {
                // The pipeline takes this instant for its latency histogram either way.
                let now = std::hint::black_box(Instant::now());
                let (out, d) = router.route(&view, None, &inbound(l, i as i64), &mut scratch);
                std::hint::black_box((out, d, now));
            }
        })
    });
    g.bench_function("route/drift_on", |b| {
        let mut scratch = RouteScratch::default();
        let mut observer = monitor.observer().expect("drift.enabled is on by default");
        b.iter(|| {
            for (i, l) in s.lines.iter().enumerate() {
                let now = Instant::now();
                let (out, d) = router.route(&view, None, &inbound(l, i as i64), &mut scratch);
                if let Some(d) = &d {
                    observer.observe(&view, d, &scratch, now);
                }
                std::hint::black_box((out, d));
            }
        })
    });
    g.finish();
}

fn drift(c: &mut Criterion) {
    for s in &streams() {
        bench_stream(c, s);
    }
}

/// One pass over the stream; nanoseconds per record.
fn pass(s: &Stream, router: &Router, view: &Arc<ModelView>, scratch: &mut RouteScratch, observer: Option<&mut DecisionObserver>) -> f64 {
    let started = Instant::now();
    match observer {
        None => {
            for (i, l) in s.lines.iter().enumerate() {
                let now = std::hint::black_box(Instant::now());
                let r = router.route(view, None, &inbound(l, i as i64), scratch);
                std::hint::black_box((r, now));
            }
        }
        Some(o) => {
            for (i, l) in s.lines.iter().enumerate() {
                let now = Instant::now();
                let (out, d) = router.route(view, None, &inbound(l, i as i64), scratch);
                if let Some(d) = &d {
                    o.observe(view, d, scratch, now);
                }
                std::hint::black_box((out, d));
            }
        }
    }
    started.elapsed().as_nanos() as f64 / s.lines.len() as f64
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Off and on alternated round by round, so load from elsewhere hits both alike.
fn paired(rounds: usize) {
    for s in &streams() {
        let router = Router::new(&s.settings).unwrap();
        let view = s.view.clone();
        let handle = ModelHandle::new(ModelView::new(
            view.model.clone(),
            view.meta.clone(),
            view.checksum.clone(),
            view.source.clone(),
        ));
        let view = handle.current();
        let monitor =
            Arc::new(DriftMonitor::new(&s.settings.drift, &s.settings.status_page, Arc::new(Metrics::new()), handle));
        let mut observer = monitor.observer().expect("drift.enabled is on by default");
        let (mut sa, mut sb) = (RouteScratch::default(), RouteScratch::default());
        // Warm both paths (and fill the window) once.
        pass(s, &router, &view, &mut sa, None);
        pass(s, &router, &view, &mut sb, Some(&mut observer));
        let (mut off, mut on, mut ratio) = (Vec::new(), Vec::new(), Vec::new());
        for r in 0..rounds {
            let (a, b) = if r % 2 == 0 {
                let a = pass(s, &router, &view, &mut sa, None);
                (a, pass(s, &router, &view, &mut sb, Some(&mut observer)))
            } else {
                let b = pass(s, &router, &view, &mut sb, Some(&mut observer));
                (pass(s, &router, &view, &mut sa, None), b)
            };
            off.push(a);
            on.push(b);
            ratio.push(b / a);
        }
        let (mo, mn, mr) = (median(&mut off), median(&mut on), median(&mut ratio));
        println!(
            "drift_{} paired over {rounds} rounds of {} records: off {mo:.0} ns/record, on {mn:.0} ns/record (medians); on/off: {:.4} (ratio of medians), {mr:.4} (median of per-round ratios)",
            s.name,
            s.lines.len(),
            mn / mo
        );
    }
}

criterion_group!(benches, drift);

fn main() {
    benches();
    // `cargo bench` passes --bench; without it (`cargo test --benches`) criterion runs each
    // benchmark once as a smoke test, and so does this: one round.
    let smoke = !std::env::args().any(|a| a == "--bench");
    paired(if smoke { 1 } else { 41 });
    Criterion::default().configure_from_args().final_summary();
}
