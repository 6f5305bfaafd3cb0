//! The service side of drift and health: `DriftMonitor`, shared by the record loop's observer (`drift_observer`), the learner's feedback and freshness calls, the status page's history and the scrape, which refreshes the time-based gauges.
//!
//! How the learner reports: `DriftMonitor` is a `LearnObserver`, which the
//! service hands to the learner. For each label learned the learner passes the
//! class the model gave the record just before learning it (test-then-train),
//! which becomes `observe_feedback(predicted, true_class, delay_seconds)`;
//! snapshots and reloads move the freshness ages. `Service::drift()` hands out
//! the monitor for other callers of the same API.

use std::collections::VecDeque;
use std::sync::atomic::{AtomicI64, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

use serde::Serialize;

use crate::drift::{
    DecisionParams, DecisionSummary, FeedbackMonitor, FeedbackParams, FeedbackSummary, PageHinkleyParams,
    ReferenceKind, ReviewedRecord,
};
use crate::learn::fold::Predicted;
use crate::metrics::Metrics;
pub use crate::runtime::drift_observer::DecisionObserver;
use crate::runtime::learner::LearnObserver;
use crate::runtime::model_view::ModelHandle;
use crate::runtime::now_ms;
use crate::settings::{DriftReference, DriftSettings, DriftThresholds, StatusPageSettings};

/// The decision side's settings from `[drift]`.
pub fn decision_params(d: &DriftSettings) -> DecisionParams {
    DecisionParams {
        window_records: d.window_records,
        reference: match d.reference {
            DriftReference::Priors => ReferenceKind::Priors,
            DriftReference::Baseline => ReferenceKind::Baseline,
            DriftReference::Trailing => ReferenceKind::Trailing,
        },
        baseline_skip_records: d.baseline_skip_records,
        baseline_records: d.baseline_records,
        min_records: d.min_records,
        psi_floor: d.psi_floor,
    }
}

/// The feedback side's settings from `[drift]`.
pub fn feedback_params(d: &DriftSettings) -> FeedbackParams {
    FeedbackParams {
        window: d.feedback_window_labels,
        min_class_labels: d.feedback_min_class_labels,
        page_hinkley: PageHinkleyParams {
            delta: d.page_hinkley_delta,
            lambda: d.page_hinkley_lambda,
            min_samples: d.page_hinkley_min_labels,
        },
        change_hold_labels: d.change_hold_labels,
    }
}

/// One point of the status page's history.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct HistoryPoint {
    pub t_ms: i64,
    pub records_in: u64,
    pub records_per_second: Option<f64>,
    pub psi: Option<f64>,
    pub js_divergence_bits: Option<f64>,
    pub unknown_token_ratio: Option<f64>,
    pub review_ratio: Option<f64>,
    pub feedback_accuracy: Option<f64>,
}

/// Throughput at one moment, from the `records_in` counter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Throughput {
    pub records_in: u64,
    pub records_out: u64,
    pub records_reviewed: u64,
    pub records_dead_lettered: u64,
    /// Records read per second over the last `window_seconds` (None until two samples exist).
    pub records_per_second: Option<f64>,
    pub window_seconds: f64,
}

/// Model freshness at one moment.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Freshness {
    pub model_version: String,
    pub classes: usize,
    pub labels_learned: u64,
    pub snapshots_written: u64,
    pub snapshot_age_seconds: f64,
    pub reload_age_seconds: f64,
    /// Model files loaded (start and reloads) and refused, as the learner counts them.
    pub loads_ok: u64,
    pub loads_refused: u64,
    pub seconds_since_last_label: f64,
}

/// Everything `/status.json` answers.
#[derive(Debug, Clone, Serialize)]
pub struct StatusReport {
    pub generated_at_ms: i64,
    pub uptime_seconds: f64,
    pub drift_enabled: bool,
    pub throughput: Throughput,
    pub decisions: Option<DecisionSummary>,
    pub feedback: FeedbackSummary,
    pub freshness: Freshness,
    pub consumer_lag_records: i64,
    pub thresholds: DriftThresholds,
    pub page_hinkley_lambda: f64,
    pub recent_reviews: Vec<ReviewedRecord>,
    pub reviews_seen: u64,
    pub history: Vec<HistoryPoint>,
    pub refresh_ms: u64,
}

/// Shared by the record loop, the learner, the admin endpoint and the sampler.
pub struct DriftMonitor {
    pub(crate) drift: DriftSettings,
    pub(crate) page: StatusPageSettings,
    pub(crate) metrics: Arc<Metrics>,
    pub(crate) model: ModelHandle,
    started: Instant,
    started_ms: i64,
    feedback: Mutex<FeedbackMonitor>,
    pub(crate) decisions: Mutex<Option<DecisionSummary>>,
    pub(crate) reviews: Mutex<(u64, Vec<ReviewedRecord>)>,
    history: Mutex<VecDeque<HistoryPoint>>,
    last_label_ms: AtomicI64,
    last_snapshot_ms: AtomicI64,
    last_reload_ms: AtomicI64,
    /// Bumped by a reload; the record loop re-pins its baseline when it sees a new value.
    pub(crate) reload_generation: AtomicU64,
}

impl DriftMonitor {
    pub fn new(drift: &DriftSettings, page: &StatusPageSettings, metrics: Arc<Metrics>, model: ModelHandle) -> DriftMonitor {
        let now = now_ms();
        let created = crate::clock::parse_rfc3339(&model.current().meta.created_at).map(|s| s * 1000).unwrap_or(now);
        let m = DriftMonitor {
            drift: drift.clone(),
            page: page.clone(),
            metrics,
            model,
            started: Instant::now(),
            started_ms: now,
            feedback: Mutex::new(FeedbackMonitor::new(feedback_params(drift))),
            decisions: Mutex::new(None),
            reviews: Mutex::new((0, Vec::new())),
            history: Mutex::new(VecDeque::with_capacity(page.history_points)),
            last_label_ms: AtomicI64::new(now),
            last_snapshot_ms: AtomicI64::new(created.min(now)),
            last_reload_ms: AtomicI64::new(now),
            reload_generation: AtomicU64::new(0),
        };
        for r in ["ok", "refused"] {
            m.metrics.model_loads.with_label_values(&[r]);
        }
        for r in ["ok", "error"] {
            m.metrics.snapshots.with_label_values(&[r]);
        }
        m.refresh_gauges();
        let view = m.model.current();
        export_feedback(&m.metrics, &m.feedback.lock().expect("feedback lock").summary(&view.classes), &view.classes);
        m
    }

    pub fn settings(&self) -> &DriftSettings {
        &self.drift
    }

    /// The record loop's observer, or `None` when `drift.enabled` is off.
    pub fn observer(self: &Arc<Self>) -> Option<DecisionObserver> {
        self.drift.enabled.then(|| DecisionObserver::new(self.clone()))
    }

    /// One complete label, compared with the decision the current model makes on its record
    /// before learning it. `delay_seconds`: from the record's time to the label's, if known.
    pub fn observe_feedback(&self, predicted: &str, true_class: &str, delay_seconds: Option<f64>) {
        let d = &self.metrics.drift;
        let view = self.model.current();
        let summary = {
            let mut f = self.feedback.lock().expect("feedback lock");
            let out = f.observe(predicted, true_class, delay_seconds);
            d.feedback_labels.with_label_values(&[if out.correct { "correct" } else { "wrong" }]).inc();
            if out.change_detected {
                d.feedback_changes.inc();
                tracing::warn!("feedback error rate rose: Page-Hinkley change detected");
            }
            f.summary(&view.classes)
        };
        if let Some(s) = delay_seconds.filter(|s| s.is_finite() && *s >= 0.0) {
            d.feedback_label_delay.observe(s);
        }
        self.last_label_ms.store(now_ms(), Ordering::Relaxed);
        export_feedback(&self.metrics, &summary, &view.classes);
    }

    /// A label arrived that had no earlier decision to compare with (the model was empty, or a
    /// correction): it still counts for "seconds since the last label". The learner counts
    /// labels learned itself (`sieveline_labels_learned_total`).
    pub fn observe_label(&self) {
        self.last_label_ms.store(now_ms(), Ordering::Relaxed);
    }

    /// A snapshot of the served model was written (the learner counts it in `sieveline_snapshots_total`).
    pub fn observe_snapshot_written(&self) {
        self.last_snapshot_ms.store(now_ms(), Ordering::Relaxed);
    }

    /// A new model was loaded from a file and is being served (the learner counts loads in
    /// `sieveline_model_loads_total`). A pinned baseline is counted again.
    pub fn observe_reload(&self) {
        let now = now_ms();
        self.last_reload_ms.store(now, Ordering::Relaxed);
        let created = crate::clock::parse_rfc3339(&self.model.current().meta.created_at).map(|s| s * 1000);
        if let Some(c) = created {
            self.last_snapshot_ms.fetch_max(c.min(now), Ordering::Relaxed);
        }
        self.reload_generation.fetch_add(1, Ordering::Relaxed);
    }

    /// Set the time-based gauges (ages); called before each scrape and status answer.
    pub fn refresh_gauges(&self) {
        let now = now_ms();
        let d = &self.metrics.drift;
        let secs = |ms: &AtomicI64| ((now - ms.load(Ordering::Relaxed)).max(0)) as f64 / 1000.0;
        d.snapshot_age.set(secs(&self.last_snapshot_ms));
        d.reload_age.set(secs(&self.last_reload_ms));
        d.feedback_since_last_label.set(secs(&self.last_label_ms));
    }

    /// Take one history sample (the status page's sampler calls this every `sample_interval_ms`).
    pub fn sample(&self) {
        let t_ms = now_ms();
        let records_in = self.metrics.records_in.get();
        let rate = self.rate_at(t_ms, records_in);
        let dec = self.decisions.lock().expect("decisions lock").clone();
        let acc = {
            let f = self.feedback.lock().expect("feedback lock");
            f.summary(&[]).accuracy
        };
        let p = HistoryPoint {
            t_ms,
            records_in,
            records_per_second: rate,
            psi: dec.as_ref().and_then(|d| d.psi),
            js_divergence_bits: dec.as_ref().and_then(|d| d.js_divergence_bits),
            unknown_token_ratio: dec.as_ref().and_then(|d| d.oov_token_ratio),
            review_ratio: dec.as_ref().and_then(|d| d.review_ratio),
            feedback_accuracy: acc,
        };
        let mut h = self.history.lock().expect("history lock");
        if h.len() >= self.page.history_points {
            h.pop_front();
        }
        h.push_back(p);
    }

    /// Records per second between the oldest sample inside the throughput window and (`t_ms`, `records_in`).
    fn rate_at(&self, t_ms: i64, records_in: u64) -> Option<f64> {
        let h = self.history.lock().expect("history lock");
        let from = t_ms - self.page.throughput_window_ms as i64;
        let base = h.iter().find(|p| p.t_ms >= from).or_else(|| h.back())?;
        let dt = (t_ms - base.t_ms) as f64 / 1000.0;
        (dt >= 0.2).then(|| records_in.saturating_sub(base.records_in) as f64 / dt)
    }

    /// Everything the status page shows, read now.
    pub fn status(&self) -> StatusReport {
        self.refresh_gauges();
        let t_ms = now_ms();
        let m = &self.metrics;
        let records_in = m.records_in.get();
        let view = self.model.current();
        let feedback = self.feedback.lock().expect("feedback lock").summary(&view.classes);
        let (reviews_seen, recent_reviews) = self.reviews.lock().expect("reviews lock").clone();
        let dead: u64 = crate::io::headers::REASONS
            .iter()
            .map(|r| m.dead_lettered.get_metric_with_label_values(&[r]).map(|c| c.get()).unwrap_or(0))
            .sum();
        let d = &m.drift;
        StatusReport {
            generated_at_ms: t_ms,
            uptime_seconds: self.started.elapsed().as_secs_f64(),
            drift_enabled: self.drift.enabled,
            throughput: Throughput {
                records_in,
                records_out: m.records_out.get(),
                records_reviewed: m.records_reviewed.get(),
                records_dead_lettered: dead,
                records_per_second: self.rate_at(t_ms, records_in),
                window_seconds: self.page.throughput_window_ms as f64 / 1000.0,
            },
            decisions: self.decisions.lock().expect("decisions lock").clone(),
            feedback,
            freshness: Freshness {
                model_version: view.meta.model_version.clone(),
                classes: view.classes.len(),
                labels_learned: m.labels_learned.get(),
                snapshots_written: m.snapshots.with_label_values(&["ok"]).get(),
                snapshot_age_seconds: d.snapshot_age.get(),
                reload_age_seconds: d.reload_age.get(),
                loads_ok: m.model_loads.with_label_values(&["ok"]).get(),
                loads_refused: m.model_loads.with_label_values(&["refused"]).get(),
                seconds_since_last_label: d.feedback_since_last_label.get(),
            },
            consumer_lag_records: d.consumer_lag.get(),
            thresholds: self.drift.thresholds.clone(),
            page_hinkley_lambda: self.drift.page_hinkley_lambda,
            recent_reviews,
            reviews_seen,
            history: self.history.lock().expect("history lock").iter().copied().collect(),
            refresh_ms: self.page.refresh_ms,
        }
    }

    /// Milliseconds since the Unix epoch when the monitor started.
    pub fn started_ms(&self) -> i64 {
        self.started_ms
    }
}

impl LearnObserver for DriftMonitor {
    fn learned(&self, class: &str, predicted: Option<&Predicted>, delay_secs: Option<f64>) {
        match predicted {
            Some(p) => self.observe_feedback(&p.class, class, delay_secs),
            None => self.observe_label(),
        }
    }

    fn snapshot_written(&self) {
        self.observe_snapshot_written();
    }

    fn reloaded(&self) {
        self.observe_reload();
    }
}

/// Two learn observers in turn (the drift monitor and one given by an embedding program).
pub struct BothObservers(pub Arc<dyn LearnObserver>, pub Arc<dyn LearnObserver>);

impl LearnObserver for BothObservers {
    fn learned(&self, class: &str, predicted: Option<&Predicted>, delay_secs: Option<f64>) {
        self.0.learned(class, predicted, delay_secs);
        self.1.learned(class, predicted, delay_secs);
    }
    fn published(&self, applied: u64) {
        self.0.published(applied);
        self.1.published(applied);
    }
    fn snapshot_written(&self) {
        self.0.snapshot_written();
        self.1.snapshot_written();
    }
    fn reloaded(&self) {
        self.0.reloaded();
        self.1.reloaded();
    }
}

/// Feedback gauges from a summary; per-class series only for the model's classes.
fn export_feedback(m: &Metrics, s: &FeedbackSummary, classes: &[Arc<str>]) {
    let d = &m.drift;
    d.feedback_accuracy.set(s.accuracy.unwrap_or(f64::NAN));
    d.feedback_window_labels.set(s.window_labels as i64);
    d.feedback_change_detected.set(s.change_active as i64);
    d.feedback_page_hinkley.set(s.page_hinkley_statistic);
    // One series per model class (bounded); NaN while a class has too few labels in the window.
    for c in classes {
        let v = s.per_class.iter().find(|a| a.class == c.as_ref()).map_or(f64::NAN, |a| a.accuracy);
        d.feedback_class_accuracy.with_label_values(&[c.as_ref()]).set(v);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::Vocabulary;
    use crate::io::message::Inbound;
    use crate::model::snapshot::SnapshotMeta;
    use crate::model::{Model, NbParams};
    use crate::runtime::model_view::ModelView;
    use crate::runtime::router::{RouteScratch, Router};
    use crate::settings::Settings;
    use crate::text::TermBag;

    fn handle(settings: &Settings) -> ModelHandle {
        let mut m = Model::new(
            NbParams::multinomial(1.0),
            settings.analyzer.clone(),
            vec!["billing".into(), "shipping".into()],
            Vocabulary::new(settings.model.vocabulary, 1000, 0),
        )
        .unwrap();
        for _ in 0..3 {
            m.learn(&TermBag::from_pairs([("refund", 1.0), ("card", 1.0)]), "billing", 1.0).unwrap();
        }
        m.learn(&TermBag::from_pairs([("parcel", 1.0), ("late", 1.0)]), "shipping", 1.0).unwrap();
        let meta = SnapshotMeta::fresh(&m, Some("test".into()));
        ModelHandle::new(ModelView::new(m, meta, "x".into(), "test".into()))
    }

    fn monitor(settings: &Settings) -> (Arc<DriftMonitor>, Arc<Metrics>) {
        let metrics = Arc::new(Metrics::new());
        let h = handle(settings);
        (Arc::new(DriftMonitor::new(&settings.drift, &settings.status_page, metrics.clone(), h)), metrics)
    }

    fn line(text: &str) -> String {
        format!("{{\"id\":\"r\",\"text\":\"{text}\"}}")
    }

    #[test]
    fn feedback_api_drives_the_feedback_metrics() {
        let mut s = Settings::defaults();
        s.drift.feedback_min_class_labels = 2;
        let (mon, metrics) = monitor(&s);
        mon.observe_feedback("billing", "billing", Some(30.0));
        mon.observe_feedback("billing", "billing", Some(90.0));
        mon.observe_feedback("shipping", "billing", None);
        mon.observe_feedback("shipping", "shipping", Some(3.0));
        mon.observe_feedback("billing", "unseen_class", Some(3.0));
        let d = &metrics.drift;
        assert_eq!(d.feedback_labels.with_label_values(&["correct"]).get(), 3);
        assert_eq!(d.feedback_labels.with_label_values(&["wrong"]).get(), 2);
        assert!((d.feedback_accuracy.get() - 0.6).abs() < 1e-12);
        assert_eq!(d.feedback_window_labels.get(), 5);
        assert!((d.feedback_class_accuracy.with_label_values(&["billing"]).get() - 2.0 / 3.0).abs() < 1e-12);
        assert!(d.feedback_class_accuracy.with_label_values(&["shipping"]).get().is_nan(), "one shipping label < 2");
        assert_eq!(d.feedback_label_delay.get_sample_count(), 4);
        assert!((d.feedback_label_delay.get_sample_sum() - 126.0).abs() < 1e-9);
        let text = metrics.render();
        assert!(!text.contains("unseen_class"), "a label's class outside the model never becomes a label value");
        // A steady stretch (1 in 20 wrong), then a burst of wrong labels: a detection, the flag
        // up, the counter counts it.
        for i in 0..300 {
            mon.observe_feedback("billing", if i % 20 == 0 { "shipping" } else { "billing" }, Some(1.0));
        }
        assert_eq!(d.feedback_changes.get(), 0, "no alarm on the steady stretch");
        for _ in 0..60 {
            mon.observe_feedback("billing", "shipping", Some(1.0));
        }
        assert_eq!(d.feedback_change_detected.get(), 1);
        assert!(d.feedback_changes.get() >= 1);
        assert!(mon.status().feedback.change_active);
    }

    #[test]
    fn freshness_calls_move_counters_and_ages() {
        let s = Settings::defaults();
        let (mon, metrics) = monitor(&s);
        let d = &metrics.drift;
        // Through the learner's observer interface.
        let obs: &dyn LearnObserver = mon.as_ref();
        obs.learned("billing", None, None);
        obs.learned("billing", Some(&Predicted { class: "shipping".into(), confidence: 0.7 }), Some(2.0));
        obs.snapshot_written();
        obs.reloaded();
        mon.refresh_gauges();
        assert_eq!(d.feedback_labels.with_label_values(&["wrong"]).get(), 1, "a predicted label is feedback");
        assert_eq!(d.feedback_labels.with_label_values(&["correct"]).get(), 0);
        assert!(d.snapshot_age.get() >= 0.0 && d.snapshot_age.get() < 5.0);
        assert!(d.reload_age.get() >= 0.0 && d.reload_age.get() < 5.0);
        assert!(d.feedback_since_last_label.get() < 5.0);
        let text = metrics.render();
        assert!(text.contains(r#"sieveline_model_loads_total{result="refused"} 0"#), "{text}");
    }

    #[test]
    fn the_record_loop_observer_publishes_window_statistics() {
        let mut s = Settings::defaults();
        s.drift.window_records = 100;
        s.drift.min_records = 10;
        s.drift.publish_every_records = 20;
        s.review.min_confidence = 0.8;
        s.status_page.recent_reviews = 3;
        s.status_page.text_chars = 12;
        let (mon, metrics) = monitor(&s);
        let router = Router::new(&s).unwrap();
        let view = mon.model.current();
        let mut obs = mon.observer().expect("enabled by default");
        let mut scratch = RouteScratch::default();
        // Training mix 3:1; the stream is all "shipping": the class mix moves far.
        for i in 0..40 {
            let text = if i % 10 == 0 { "glowring firmware pairing" } else { "parcel late parcel" };
            let payload = line(text);
            let rec = Inbound { topic: "t", partition: 0, offset: i, key: None, payload: Some(payload.as_bytes()), headers: Vec::new(), timestamp_ms: None };
            let (_, d) = router.route(&view, None, &rec, &mut scratch);
            obs.observe(&view, d.as_ref().unwrap(), &scratch, Instant::now());
        }
        let d = &metrics.drift;
        assert_eq!(d.window_records.get(), 40);
        let summary = mon.status().decisions.expect("published after 20 records");
        let shipping = summary.class_mix.iter().find(|c| c.class == "shipping").unwrap();
        assert!((shipping.reference.unwrap() - 0.25).abs() < 1e-12);
        // Unknown-only records are scored by priors alone: billing, 0.75: reviewed (< 0.8).
        assert!((shipping.window - 0.9).abs() < 1e-12, "{summary:?}");
        assert!(d.class_mix_psi.get() > 0.25, "psi {}", d.class_mix_psi.get());
        // 4 records of 3 unknown tokens among 40 records of 3 tokens.
        assert!((d.unknown_tokens.get() - 0.1).abs() < 1e-12);
        assert!((d.mostly_unknown_records.get() - 0.1).abs() < 1e-12);
        assert!((d.review_ratio.get() - 0.1).abs() < 1e-12);
        assert_eq!(d.decision_confidence.get_sample_count(), 40);
        assert_eq!(d.class_share.with_label_values(&["shipping", "window"]).get(), 0.9);
        let st = mon.status();
        assert_eq!(st.reviews_seen, 4);
        assert_eq!(st.recent_reviews.len(), 3);
        assert_eq!(st.recent_reviews[0].text, "glowring fir…");
        assert_eq!(st.recent_reviews[0].reason, "low_confidence");
    }
}
