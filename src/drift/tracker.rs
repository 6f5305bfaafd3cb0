//! `DecisionTracker`: the decision side of drift, owned by the record loop — the sliding window, the reference class mix, and the summary (class mix, PSI, Jensen–Shannon divergence, unknown-token rates, confidence, review rate) computed from them on demand.

use std::sync::Arc;

use serde::Serialize;

use super::divergence::{js_divergence_bits, normalise, psi};
use super::reference::{Baseline, ReferenceKind, Trailing};
use super::window::{confidence_bucket_bounds, DecisionWindow, Observation};

/// Settings of the decision side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DecisionParams {
    pub window_records: usize,
    pub reference: ReferenceKind,
    /// Records after start or reload left out of the baseline (a warm-up).
    pub baseline_skip_records: u64,
    pub baseline_records: u64,
    /// PSI and JS are reported once the window holds this many records.
    pub min_records: u64,
    pub psi_floor: f64,
}

/// One class's share in the window and in the reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassShare {
    pub class: String,
    pub window: f64,
    pub reference: Option<f64>,
}

/// One bar of the confidence histogram.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConfidenceBar {
    /// The bucket is [upper − 0.1, upper), the last one including 1.
    pub upper: f64,
    pub records: u64,
}

/// The decision-side numbers at one moment.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DecisionSummary {
    pub window_records: u64,
    pub window_capacity: u64,
    /// Records observed since start.
    pub observed: u64,
    pub reference: ReferenceKind,
    /// Reference records counted so far (the baseline and trailing references only).
    pub baseline_records: Option<u64>,
    pub class_mix: Vec<ClassShare>,
    pub psi: Option<f64>,
    pub js_divergence_bits: Option<f64>,
    pub oov_token_ratio: Option<f64>,
    pub oov_record_ratio: Option<f64>,
    pub confidence_mean: Option<f64>,
    pub confidence_histogram: Vec<ConfidenceBar>,
    pub review_ratio: Option<f64>,
}

/// The record loop's drift state.
#[derive(Debug, Clone)]
pub struct DecisionTracker {
    params: DecisionParams,
    window: DecisionWindow,
    baseline: Option<Baseline>,
    trailing: Option<Trailing>,
}

impl DecisionTracker {
    pub fn new(params: DecisionParams, classes: &[Arc<str>]) -> DecisionTracker {
        let baseline = (params.reference == ReferenceKind::Baseline).then(|| Baseline::new(params.baseline_skip_records, params.baseline_records, classes));
        let trailing = (params.reference == ReferenceKind::Trailing).then(|| Trailing::new(params.baseline_records, classes));
        DecisionTracker { params, window: DecisionWindow::new(params.window_records, classes), baseline, trailing }
    }

    #[inline]
    pub fn observe(&mut self, o: &Observation) {
        let left = self.window.observe(o);
        if let Some(b) = &mut self.baseline {
            b.observe(o.class);
        }
        if let (Some(t), Some(class)) = (&mut self.trailing, left) {
            t.push(class);
        }
    }

    pub fn classes(&self) -> &[Arc<str>] {
        self.window.classes()
    }

    /// The served model's classes changed: re-index the window and baseline by name.
    pub fn set_classes(&mut self, classes: &[Arc<str>]) {
        self.window.set_classes(classes);
        if let Some(b) = &mut self.baseline {
            b.set_classes(classes);
        }
        if let Some(t) = &mut self.trailing {
            t.set_classes(classes);
        }
    }

    /// Count a new baseline from the next records (after a model reload).
    pub fn repin(&mut self) {
        if let Some(b) = &mut self.baseline {
            b.repin();
        }
        if let Some(t) = &mut self.trailing {
            t.clear();
        }
    }

    /// The numbers now; `doc_counts` are the served model's document counts per class (the priors reference).
    pub fn summarise(&self, doc_counts: &[f64]) -> DecisionSummary {
        let c = self.window.counts();
        let classes = self.window.classes();
        let window: Vec<f64> = c.class_counts.iter().map(|&n| n as f64).collect();
        let pinned = |cs: Option<&[u64]>| cs.map(|cs| cs.iter().map(|&n| n as f64).collect());
        let reference: Option<Vec<f64>> = match (&self.baseline, &self.trailing) {
            (Some(b), _) => pinned(b.counts()),
            (_, Some(t)) => pinned(t.counts()),
            (None, None) => (doc_counts.len() == classes.len() && doc_counts.iter().sum::<f64>() > 0.0).then(|| doc_counts.to_vec()),
        };
        let enough = c.records >= self.params.min_records && window.iter().sum::<f64>() > 0.0;
        let (psi_v, js_v) = match (&reference, enough) {
            (Some(r), true) => (psi(&window, r, self.params.psi_floor), js_divergence_bits(&window, r)),
            _ => (None, None),
        };
        let wshare = normalise(&window);
        let rshare = reference.as_deref().map(normalise);
        let class_mix = classes
            .iter()
            .enumerate()
            .map(|(i, name)| ClassShare {
                class: name.to_string(),
                window: wshare[i],
                reference: rshare.as_ref().map(|r| r[i]),
            })
            .collect();
        let bounds = confidence_bucket_bounds();
        DecisionSummary {
            window_records: c.records,
            window_capacity: self.window.capacity() as u64,
            observed: c.observed,
            reference: self.params.reference,
            baseline_records: self.baseline.as_ref().map(Baseline::seen).or(self.trailing.as_ref().map(Trailing::seen)),
            class_mix,
            psi: psi_v,
            js_divergence_bits: js_v,
            oov_token_ratio: c.oov_token_ratio(),
            oov_record_ratio: c.oov_record_ratio(),
            confidence_mean: c.confidence_mean(),
            confidence_histogram: bounds
                .iter()
                .zip(c.confidence_buckets)
                .map(|(&upper, records)| ConfidenceBar { upper, records })
                .collect(),
            review_ratio: c.review_ratio(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes() -> Vec<Arc<str>> {
        ["a", "b", "c"].iter().map(|n| Arc::<str>::from(*n)).collect()
    }

    fn params(reference: ReferenceKind) -> DecisionParams {
        DecisionParams { window_records: 100, reference, baseline_skip_records: 0, baseline_records: 100, min_records: 50, psi_floor: 1e-4 }
    }

    fn feed(t: &mut DecisionTracker, mix: [usize; 3], n: usize) {
        for i in 0..n {
            let r = i % 10;
            let class = if r < mix[0] { 0 } else if r < mix[0] + mix[1] { 1 } else { 2 };
            t.observe(&Observation { class: Some(class), confidence: 0.8, known_tokens: 9, total_tokens: 10, review: false });
        }
    }

    #[test]
    fn priors_reference_psi_rises_when_the_mix_moves() {
        let mut t = DecisionTracker::new(params(ReferenceKind::Priors), &classes());
        let priors = [50.0, 30.0, 20.0];
        feed(&mut t, [5, 3, 2], 40);
        assert_eq!(t.summarise(&priors).psi, None, "fewer than min_records records");
        feed(&mut t, [5, 3, 2], 60);
        let s = t.summarise(&priors);
        assert!(s.psi.unwrap().abs() < 1e-12 && s.js_divergence_bits.unwrap() < 1e-12, "{s:?}");
        assert_eq!(s.class_mix[0], ClassShare { class: "a".into(), window: 0.5, reference: Some(0.5) });
        // The window fills with 40/40/20: PSI of the worked example, 0.0510826.
        feed(&mut t, [4, 4, 2], 100);
        let s = t.summarise(&priors);
        assert!((s.psi.unwrap() - 0.051_082_6).abs() < 1e-6, "{s:?}");
        assert_eq!(s.oov_token_ratio, Some(0.1));
        assert_eq!(s.confidence_histogram[8].records, 100);
        assert_eq!(s.window_records, 100);
    }

    #[test]
    fn baseline_reference_is_pinned_from_the_first_records() {
        let mut t = DecisionTracker::new(params(ReferenceKind::Baseline), &classes());
        feed(&mut t, [4, 4, 2], 100);
        let s = t.summarise(&[1.0, 1.0, 1.0]);
        assert_eq!(s.baseline_records, Some(100));
        assert!(s.psi.unwrap().abs() < 1e-12, "the window is the baseline: {s:?}");
        feed(&mut t, [5, 3, 2], 100);
        let s = t.summarise(&[1.0, 1.0, 1.0]);
        assert!((s.psi.unwrap() - 0.051_082_6).abs() < 1e-6, "{s:?}");
        t.repin();
        assert_eq!(t.summarise(&[]).psi, None);
    }

    #[test]
    fn trailing_reference_rises_at_a_change_and_fades_once_the_new_mix_fills_it() {
        let mut t = DecisionTracker::new(params(ReferenceKind::Trailing), &classes());
        feed(&mut t, [4, 4, 2], 100);
        assert_eq!(t.summarise(&[]).psi, None, "nothing has left the window yet");
        feed(&mut t, [4, 4, 2], 100);
        let s = t.summarise(&[]);
        assert_eq!(s.baseline_records, Some(100));
        assert!(s.psi.unwrap().abs() < 1e-12, "same mix before and in the window: {s:?}");
        // The change: the window holds the new mix, the trailing records the old one.
        feed(&mut t, [5, 3, 2], 100);
        assert!((t.summarise(&[]).psi.unwrap() - 0.051_082_6).abs() < 1e-6);
        // Once the new mix has filled the trailing records too, it is the normal again.
        feed(&mut t, [5, 3, 2], 100);
        assert!(t.summarise(&[]).psi.unwrap().abs() < 1e-12);
        t.repin();
        assert_eq!(t.summarise(&[]).psi, None, "a reload starts the trailing records afresh");
    }
}
