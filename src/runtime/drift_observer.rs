//! `DecisionObserver`: the record loop's drift bookkeeping — plain counters per record in a struct the loop owns, summarised into gauges and the status page's copy every `drift.publish_every_records` records (or at the first record after `drift.publish_interval_ms`). No lock per record.

use std::sync::atomic::Ordering;
use std::sync::Arc;
use std::time::{Duration, Instant};

use prometheus::local::LocalHistogram;

use crate::decide::Decision;
use crate::drift::oov::{known_from_score, known_tokens};
use crate::drift::{DecisionTracker, Observation, ReviewRing};
use crate::runtime::model_view::ModelView;
use crate::runtime::monitor::{decision_params, DriftMonitor};
use crate::runtime::router::RouteScratch;

/// The record loop's side: counters per record, a summary every `publish_every_records`
/// records or at the first record after `publish_interval_ms`.
pub struct DecisionObserver {
    monitor: Arc<DriftMonitor>,
    tracker: DecisionTracker,
    reviews: ReviewRing,
    published_reviews: u64,
    confidence: LocalHistogram,
    since_publish: u64,
    every: u64,
    interval: Duration,
    last_publish: Instant,
    /// The view the class indices refer to (its address), and the reload generation seen.
    view_id: usize,
    generation: u64,
}

impl DecisionObserver {
    pub(crate) fn new(monitor: Arc<DriftMonitor>) -> DecisionObserver {
        let view = monitor.model.current();
        let d = &monitor.drift;
        let page = &monitor.page;
        DecisionObserver {
            tracker: DecisionTracker::new(decision_params(d), &view.classes),
            reviews: ReviewRing::new(page.recent_reviews, page.text_chars),
            published_reviews: 0,
            confidence: monitor.metrics.drift.decision_confidence.local(),
            since_publish: 0,
            every: d.publish_every_records,
            interval: Duration::from_millis(d.publish_interval_ms),
            last_publish: Instant::now(),
            view_id: Arc::as_ptr(&view) as usize,
            generation: monitor.reload_generation.load(Ordering::Relaxed),
            monitor,
        }
    }

    /// One routed record. `now` is any recent instant (the pipeline's own timestamp).
    #[inline]
    pub fn observe(&mut self, view: &Arc<ModelView>, decision: &Decision, scratch: &RouteScratch, now: Instant) {
        if Arc::as_ptr(view) as usize != self.view_id {
            self.view_changed(view);
        }
        let model = &view.model;
        let (class, (known, total)) = match scratch.model_score() {
            Some((scored, s)) if view.classes[scored.best].as_ref() == decision.class => {
                (Some(scored.best), known_from_score(model, scored, s))
            }
            Some((scored, s)) => (model.class_index(&decision.class), known_from_score(model, scored, s)),
            None => (model.class_index(&decision.class), known_tokens(model, scratch.bag())),
        };
        let review = decision.review.is_some();
        self.tracker.observe(&Observation {
            class,
            confidence: decision.confidence,
            known_tokens: known,
            total_tokens: total,
            review,
        });
        self.confidence.observe(decision.confidence);
        if let Some(reason) = &decision.review {
            self.reviews.push(
                decision.id.as_deref(),
                &decision.class,
                decision.confidence,
                reason.label(),
                scratch.fields().iter().map(|(t, _)| t.as_str()),
            );
        }
        self.since_publish += 1;
        if self.since_publish >= self.every || now.saturating_duration_since(self.last_publish) >= self.interval {
            self.publish(view, now);
        }
    }

    #[cold]
    fn view_changed(&mut self, view: &Arc<ModelView>) {
        self.view_id = Arc::as_ptr(view) as usize;
        self.tracker.set_classes(&view.classes);
        let g = self.monitor.reload_generation.load(Ordering::Relaxed);
        if g != self.generation {
            self.generation = g;
            self.tracker.repin();
        }
    }

    /// Summarise into gauges and the status page's copy now.
    pub fn publish(&mut self, view: &ModelView, now: Instant) {
        self.since_publish = 0;
        self.last_publish = now;
        self.confidence.flush();
        let s = self.tracker.summarise(view.model.doc_counts());
        let d = &self.monitor.metrics.drift;
        d.window_records.set(s.window_records as i64);
        d.class_mix_psi.set(s.psi.unwrap_or(f64::NAN));
        d.class_mix_js_bits.set(s.js_divergence_bits.unwrap_or(f64::NAN));
        d.unknown_tokens.set(s.oov_token_ratio.unwrap_or(f64::NAN));
        d.mostly_unknown_records.set(s.oov_record_ratio.unwrap_or(f64::NAN));
        d.confidence_mean.set(s.confidence_mean.unwrap_or(f64::NAN));
        d.review_ratio.set(s.review_ratio.unwrap_or(f64::NAN));
        let stale = {
            let prev = self.monitor.decisions.lock().expect("decisions lock");
            prev.as_ref().is_some_and(|p| p.class_mix.iter().map(|c| &c.class).ne(s.class_mix.iter().map(|c| &c.class)))
        };
        if stale {
            d.class_share.reset();
        }
        for c in &s.class_mix {
            d.class_share.with_label_values(&[c.class.as_str(), "window"]).set(c.window);
            d.class_share.with_label_values(&[c.class.as_str(), "reference"]).set(c.reference.unwrap_or(f64::NAN));
        }
        *self.monitor.decisions.lock().expect("decisions lock") = Some(s);
        if self.reviews.seen() != self.published_reviews {
            self.published_reviews = self.reviews.seen();
            *self.monitor.reviews.lock().expect("reviews lock") = (self.reviews.seen(), self.reviews.newest_first());
        }
    }
}
