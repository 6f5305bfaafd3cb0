//! Online learning costs, in process: scoring throughput while the learner folds 10,000 labels/s against idle (alternating rounds in one run), label-to-effect latency (label handed to the log → first record scored with a view that includes it), and peak memory of the recent-record cache at 1,000,000 entries.
//!
//! Run: `cargo bench --bench learning`. Under `cargo test --benches` it runs a short smoke version.
//! The label log here is in-process (`ChannelLabelLog`), so the latency excludes the broker's
//! produce/fetch round trip; `tests/learning_kafka.rs` prints the end-to-end figure with a broker.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use sieveline::demo::{generate, DemoConfig, Fields, Kind};
use sieveline::io::message::Inbound;
use sieveline::learn::{CachedRecord, PackedTerms, RecentCache};
use sieveline::metrics::Metrics;
use sieveline::model::snapshot::SnapshotMeta;
use sieveline::model::{Model, NbParams};
use sieveline::runtime::label_log::ChannelLabelLog;
use sieveline::runtime::learner::{self, LearnerConfig, LearnerParts};
use sieveline::runtime::model_view::{ModelHandle, ModelView};
use sieveline::runtime::router::{RouteScratch, Router};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

fn rss_kib(key: &str) -> u64 {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    s.lines().find(|l| l.starts_with(key)).and_then(|l| l.split_whitespace().nth(1)).and_then(|v| v.parse().ok()).unwrap_or(0)
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(|a, b| a.partial_cmp(b).unwrap());
    v[v.len() / 2]
}

fn pct(v: &mut [f64], p: f64) -> f64 {
    v.sort_by(|a, b| a.partial_cmp(b).unwrap());
    v[((v.len() as f64 - 1.0) * p).round() as usize]
}

fn main() {
    let full = std::env::args().any(|a| a == "--bench");
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let g = generate(&DemoConfig::new(7, if full { 20_000 } else { 2_000 }, vec![Kind::Tickets]));
    let stream = &g.streams[0];
    let texts: Vec<(String, String)> = stream
        .records
        .iter()
        .map(|r| match &r.fields {
            Fields::Ticket { subject, body } => (subject.clone(), body.clone()),
            Fields::Log { service, text } => (service.clone(), text.clone()),
        })
        .collect();

    // 1. The recent-record cache at capacity.
    let capacity = if full { 1_000_000 } else { 10_000 };
    let mut scratch = AnalyzerScratch::default();
    let bags: Vec<TermBag> = texts
        .iter()
        .take(2_000)
        .map(|(s, b)| {
            let mut bag = TermBag::new();
            analyzer.analyze_fields([(s.as_str(), 2.0), (b.as_str(), 1.0)], &mut scratch, &mut bag);
            bag
        })
        .collect();
    let mean_terms = bags.iter().map(TermBag::len).sum::<usize>() as f64 / bags.len() as f64;
    let before = rss_kib("VmRSS:");
    let started = Instant::now();
    let mut cache = RecentCache::new(capacity, Duration::from_secs(3600));
    let now = Instant::now();
    for i in 0..capacity {
        let rec = CachedRecord { terms: PackedTerms::pack(&bags[i % bags.len()]), class: "returns".into(), partition: 0, scored_ms: 0 };
        cache.insert(&format!("tk-{i:09}"), rec, now);
    }
    let after = rss_kib("VmRSS:");
    println!(
        "recent-record cache: {} entries (ticket records, {mean_terms:.0} terms each) filled in {:.2}s; resident memory +{:.1} MiB ({:.0} bytes an entry)",
        cache.len(),
        started.elapsed().as_secs_f64(),
        (after.saturating_sub(before)) as f64 / 1024.0,
        (after.saturating_sub(before)) as f64 * 1024.0 / capacity as f64
    );
    drop(cache);

    // 2. A base model from the first 2,000 records' true classes.
    let classes: Vec<String> = {
        let mut c: Vec<String> = stream.truth.iter().map(|t| t.class.to_string()).collect();
        c.sort();
        c.dedup();
        c
    };
    let mut model = Model::new(
        NbParams::from_settings(&settings.model),
        settings.analyzer.clone(),
        classes,
        sieveline::features::Vocabulary::new(settings.model.vocabulary, settings.model.max_vocabulary, settings.model.hash_buckets),
    )
    .unwrap();
    for (i, bag) in bags.iter().enumerate() {
        model.learn(bag, stream.truth[i].class, 1.0).unwrap();
    }
    let models = ModelHandle::new(ModelView::new(model, SnapshotMeta::default(), "0".repeat(64), "bench".into()));
    let (tx, log) = ChannelLabelLog::new("labels");
    let mut cfg = LearnerConfig::from_settings(&settings);
    cfg.snapshot_path = None;
    let handle = learner::start(
        LearnerParts {
            start: models.current(),
            log: Box::new(log),
            models: models.clone(),
            metrics: Arc::new(Metrics::new()),
            observer: None,
            dead_letters: None,
        },
        cfg,
    )
    .unwrap();

    // Label events: complete, with the record's fields, cycling through the stream.
    let events: Vec<Vec<u8>> = stream
        .records
        .iter()
        .zip(&stream.truth)
        .map(|(r, t)| serde_json::to_vec(&serde_json::json!({"id": r.id, "class": t.class, "fields": r.fields})).unwrap())
        .collect();
    let payloads: Vec<Vec<u8>> = stream.records.iter().map(|r| serde_json::to_vec(r).unwrap()).collect();
    let router = Router::new(&settings).unwrap();

    // 3. Scoring, idle and while learning 10,000 labels/s, in alternating rounds.
    let round = Duration::from_millis(if full { 3_000 } else { 200 });
    let rounds = if full { 4 } else { 1 };
    let rate = 10_000.0;
    let sent_at: Arc<Mutex<Vec<Instant>>> = Arc::new(Mutex::new(Vec::new()));
    let mut latencies: Vec<f64> = Vec::new();
    let mut idle = Vec::new();
    let mut busy = Vec::new();
    let mut learned_per_sec = Vec::new();
    let mut rs = RouteScratch::default();
    let mut i = 0usize;
    for _ in 0..rounds {
        for learning in [false, true] {
            let stop = Arc::new(AtomicBool::new(false));
            let feeder = learning.then(|| {
                let (tx, events, stop, sent_at) = (tx.clone(), events.clone(), stop.clone(), sent_at.clone());
                std::thread::spawn(move || {
                    let start = Instant::now();
                    let mut n = 0usize;
                    while !stop.load(Ordering::Relaxed) {
                        let due = start + Duration::from_secs_f64(n as f64 / rate);
                        if let Some(w) = due.checked_duration_since(Instant::now()) {
                            std::thread::sleep(w);
                        }
                        let mut s = sent_at.lock().unwrap();
                        tx.send(events[s.len() % events.len()].clone()).unwrap();
                        s.push(Instant::now());
                        n += 1;
                    }
                    n as f64 / start.elapsed().as_secs_f64()
                })
            });
            let start = Instant::now();
            let mut scored = 0u64;
            let mut seen_applied = models.current().applied as usize;
            while start.elapsed() < round {
                for _ in 0..256 {
                    let p = &payloads[i % payloads.len()];
                    i += 1;
                    let rec = Inbound { topic: "in", partition: 0, offset: i as i64, key: None, payload: Some(p), headers: Vec::new(), timestamp_ms: None };
                    let view = models.current();
                    let (out, _) = router.route(&view, None, &rec, &mut rs);
                    std::hint::black_box(&out);
                    scored += 1;
                    let applied = view.applied as usize;
                    if applied > seen_applied {
                        let now = Instant::now();
                        let s = sent_at.lock().unwrap();
                        for t in &s[seen_applied.min(s.len())..applied.min(s.len())] {
                            latencies.push(now.duration_since(*t).as_secs_f64());
                        }
                        seen_applied = applied;
                    }
                }
            }
            let per_sec = scored as f64 / start.elapsed().as_secs_f64();
            stop.store(true, Ordering::Relaxed);
            if let Some(f) = feeder {
                learned_per_sec.push(f.join().unwrap());
                busy.push(per_sec);
            } else {
                idle.push(per_sec);
            }
            // Let the learner drain before the next round.
            std::thread::sleep(Duration::from_millis(300));
        }
    }
    handle.stop();
    let (mi, mb) = (median(idle.clone()), median(busy.clone()));
    println!(
        "scoring (route = decode + analyze + score + output), one thread: idle {:.0} records/s (rounds {:?}), while learning {:.0} labels/s {:.0} records/s (rounds {:?}); ratio {:.2}",
        mi,
        idle.iter().map(|x| x.round()).collect::<Vec<_>>(),
        median(learned_per_sec),
        mb,
        busy.iter().map(|x| x.round()).collect::<Vec<_>>(),
        mb / mi
    );
    if latencies.is_empty() {
        println!("label-to-effect latency: no label took effect during the scoring rounds");
    } else {
        let n = latencies.len();
        println!(
            "label-to-effect latency (label handed to the log → first record scored with it, publish interval {} ms): p50 {:.1} ms, p99 {:.1} ms, max {:.1} ms over {n} labels",
            settings.learning.publish_interval_ms,
            pct(&mut latencies, 0.5) * 1e3,
            pct(&mut latencies, 0.99) * 1e3,
            pct(&mut latencies, 1.0) * 1e3
        );
    }
    println!("peak RSS of the run: {:.1} MiB", rss_kib("VmHWM:") as f64 / 1024.0);
}
