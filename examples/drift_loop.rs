//! Profiling aid for the drift bench: route the demo streams PASSES times (argv 2, default 10) with the drift observer `off` or `on` (argv 1), or only load them (`setup`). Run under `valgrind --tool=callgrind` for instruction counts that do not depend on machine load (`scripts/profile-drift.sh`).

use std::sync::Arc;
use std::time::Instant;

use sieveline::metrics::Metrics;
use sieveline::runtime::model_view::{ModelHandle, ModelView};
use sieveline::runtime::monitor::DriftMonitor;
use sieveline::runtime::router::{RouteScratch, Router};

#[path = "../benches/support/drift_data.rs"]
mod drift_data;

fn main() {
    let mode = std::env::args().nth(1).unwrap_or_else(|| "on".into());
    let passes: usize = std::env::args().nth(2).and_then(|s| s.parse().ok()).unwrap_or(10);
    let which = std::env::args().nth(3).unwrap_or_else(|| "tickets".into());
    let s = drift_data::streams().into_iter().find(|s| s.name == which).expect("tickets or logs");
    let router = Router::new(&s.settings).unwrap();
    let v = &s.view;
    let handle = ModelHandle::new(ModelView::new(v.model.clone(), v.meta.clone(), v.checksum.clone(), v.source.clone()));
    let view = handle.current();
    let monitor = Arc::new(DriftMonitor::new(&s.settings.drift, &s.settings.status_page, Arc::new(Metrics::new()), handle));
    let mut observer = monitor.observer().expect("drift.enabled is on by default");
    let mut scratch = RouteScratch::default();
    let mut n = 0usize;
    if mode != "setup" {
        for _ in 0..passes {
            for (i, l) in s.lines.iter().enumerate() {
                let now = Instant::now();
                let (out, d) = router.route(&view, None, &drift_data::inbound(l, i as i64), &mut scratch);
                if let (true, Some(d)) = (mode == "on", &d) {
                    observer.observe(&view, d, &scratch, now);
                }
                n += out.payload.len();
                std::hint::black_box(&d);
            }
        }
    }
    println!("{mode} {which}: {} records, {n} output bytes", passes * s.lines.len());
}
