//! `FeedbackMonitor`: prequential (test-then-train) accuracy of the decisions made before each label arrived, over the last N labels, overall and per true class; label delay; Page–Hinkley change detection on the error stream.

use std::collections::{BTreeMap, VecDeque};
use std::sync::Arc;

use serde::Serialize;

use super::page_hinkley::{PageHinkley, PageHinkleyParams};

/// Settings of the feedback side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FeedbackParams {
    /// Labels in the accuracy window.
    pub window: usize,
    /// A class's accuracy is reported only with at least this many labels of it in the window.
    pub min_class_labels: u64,
    pub page_hinkley: PageHinkleyParams,
    /// After a detection the change flag stays up for this many labels.
    pub change_hold_labels: u64,
}

#[derive(Debug, Clone)]
struct Entry {
    truth: Arc<str>,
    correct: bool,
    /// Label delay in milliseconds, when known.
    delay_ms: Option<u64>,
}

/// What one label did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FeedbackOutcome {
    pub correct: bool,
    /// This label completed a Page–Hinkley detection.
    pub change_detected: bool,
}

/// Accuracy on the labels of one true class in the window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassAccuracy {
    pub class: String,
    pub labels: u64,
    pub accuracy: f64,
}

/// The feedback numbers at one moment.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FeedbackSummary {
    /// Labels in the window now.
    pub window_labels: u64,
    pub accuracy: Option<f64>,
    /// Classes with at least `min_class_labels` labels in the window, in name order.
    pub per_class: Vec<ClassAccuracy>,
    /// Mean label delay over the window's labels that carry one.
    pub delay_mean_seconds: Option<f64>,
    pub labels_total: u64,
    pub wrong_total: u64,
    pub changes_detected: u64,
    /// True for `change_hold_labels` labels after a detection.
    pub change_active: bool,
    pub page_hinkley_statistic: f64,
    pub page_hinkley_threshold: f64,
}

/// The feedback side's state; one per service, behind a lock (labels are rare next to records).
#[derive(Debug, Clone)]
pub struct FeedbackMonitor {
    params: FeedbackParams,
    ring: VecDeque<Entry>,
    correct: u64,
    delay_sum_ms: u64,
    delay_n: u64,
    per_class: BTreeMap<Arc<str>, (u64, u64)>,
    labels_total: u64,
    wrong_total: u64,
    ph: PageHinkley,
    changes: u64,
    last_change_at: Option<u64>,
}

impl FeedbackMonitor {
    pub fn new(params: FeedbackParams) -> FeedbackMonitor {
        FeedbackMonitor {
            params,
            ring: VecDeque::with_capacity(params.window.max(1)),
            correct: 0,
            delay_sum_ms: 0,
            delay_n: 0,
            per_class: BTreeMap::new(),
            labels_total: 0,
            wrong_total: 0,
            ph: PageHinkley::new(params.page_hinkley),
            changes: 0,
            last_change_at: None,
        }
    }

    /// One label: the class decided before it arrived, the class it confirms, and how long after the record it came.
    pub fn observe(&mut self, predicted: &str, truth: &str, delay_seconds: Option<f64>) -> FeedbackOutcome {
        let correct = predicted == truth;
        let truth: Arc<str> = match self.per_class.get_key_value(truth) {
            Some((k, _)) => k.clone(),
            None => Arc::from(truth),
        };
        let delay_ms = delay_seconds.filter(|d| d.is_finite() && *d >= 0.0).map(|d| (d * 1000.0).round() as u64);
        if self.ring.len() >= self.params.window.max(1) {
            if let Some(old) = self.ring.pop_front() {
                self.forget(&old);
            }
        }
        let e = Entry { truth, correct, delay_ms };
        self.correct += correct as u64;
        if let Some(d) = e.delay_ms {
            self.delay_sum_ms += d;
            self.delay_n += 1;
        }
        let c = self.per_class.entry(e.truth.clone()).or_insert((0, 0));
        c.0 += 1;
        c.1 += correct as u64;
        self.ring.push_back(e);
        self.labels_total += 1;
        self.wrong_total += !correct as u64;
        let change_detected = self.ph.push(if correct { 0.0 } else { 1.0 });
        if change_detected {
            self.changes += 1;
            self.last_change_at = Some(self.labels_total);
        }
        FeedbackOutcome { correct, change_detected }
    }

    fn forget(&mut self, old: &Entry) {
        self.correct -= old.correct as u64;
        if let Some(d) = old.delay_ms {
            self.delay_sum_ms -= d;
            self.delay_n -= 1;
        }
        if let Some(c) = self.per_class.get_mut(&old.truth) {
            c.0 -= 1;
            c.1 -= old.correct as u64;
            if c.0 == 0 {
                self.per_class.remove(&old.truth);
            }
        }
    }

    /// The numbers now. Per-class accuracy only for `classes` (the model's), so labels stay bounded.
    pub fn summary(&self, classes: &[Arc<str>]) -> FeedbackSummary {
        let n = self.ring.len() as u64;
        let per_class = self
            .per_class
            .iter()
            .filter(|(c, (labels, _))| *labels >= self.params.min_class_labels && classes.contains(c))
            .map(|(c, (labels, right))| ClassAccuracy {
                class: c.to_string(),
                labels: *labels,
                accuracy: *right as f64 / *labels as f64,
            })
            .collect();
        FeedbackSummary {
            window_labels: n,
            accuracy: (n > 0).then(|| self.correct as f64 / n as f64),
            per_class,
            delay_mean_seconds: (self.delay_n > 0).then(|| self.delay_sum_ms as f64 / self.delay_n as f64 / 1000.0),
            labels_total: self.labels_total,
            wrong_total: self.wrong_total,
            changes_detected: self.changes,
            change_active: self
                .last_change_at
                .is_some_and(|at| self.labels_total - at < self.params.change_hold_labels),
            page_hinkley_statistic: self.ph.statistic(),
            page_hinkley_threshold: self.params.page_hinkley.lambda,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(window: usize) -> FeedbackParams {
        FeedbackParams {
            window,
            min_class_labels: 2,
            page_hinkley: PageHinkleyParams { delta: 0.05, lambda: 20.0, min_samples: 30 },
            change_hold_labels: 5,
        }
    }

    fn classes(names: &[&str]) -> Vec<Arc<str>> {
        names.iter().map(|n| Arc::<str>::from(*n)).collect()
    }

    #[test]
    fn windowed_accuracy_overall_and_per_class() {
        let mut f = FeedbackMonitor::new(params(4));
        assert_eq!(f.summary(&[]).accuracy, None);
        f.observe("billing", "billing", Some(10.0));
        f.observe("billing", "returns", Some(30.0));
        f.observe("returns", "returns", None);
        let s = f.summary(&classes(&["billing", "returns"]));
        assert_eq!(s.window_labels, 3);
        assert!((s.accuracy.unwrap() - 2.0 / 3.0).abs() < 1e-12);
        assert_eq!(s.delay_mean_seconds, Some(20.0));
        // billing has 1 label (< 2): not reported; returns 2 labels, 1 right.
        assert_eq!(s.per_class, vec![ClassAccuracy { class: "returns".into(), labels: 2, accuracy: 0.5 }]);
        f.observe("shipping", "shipping", Some(5.0));
        f.observe("shipping", "shipping", Some(5.0)); // pushes out the first label
        let s = f.summary(&classes(&["billing", "returns"]));
        assert_eq!(s.window_labels, 4);
        assert_eq!(s.accuracy, Some(0.75));
        assert!((s.delay_mean_seconds.unwrap() - 40.0 / 3.0).abs() < 1e-12);
        // shipping is not a model class here: counted overall, never as a label value.
        assert!(s.per_class.iter().all(|c| c.class != "shipping"));
        assert_eq!((s.labels_total, s.wrong_total), (5, 1));
    }

    #[test]
    fn a_burst_of_errors_flips_the_change_flag_then_it_falls_back() {
        let mut f = FeedbackMonitor::new(params(100));
        for i in 0..200 {
            let out = f.observe("a", if i % 20 == 0 { "b" } else { "a" }, None);
            assert!(!out.change_detected, "false alarm at {i}");
        }
        let mut at = None;
        for i in 0..200 {
            if f.observe("a", "b", None).change_detected {
                at = Some(i);
                break;
            }
        }
        let at = at.expect("all-wrong labels are detected");
        assert!(at < 60, "detected after {at} wrong labels");
        let s = f.summary(&[]);
        assert!(s.change_active);
        assert_eq!(s.changes_detected, 1);
        for _ in 0..5 {
            f.observe("a", "a", None);
        }
        assert!(!f.summary(&[]).change_active, "the flag falls after change_hold_labels labels");
    }
}
