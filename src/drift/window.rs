//! `DecisionWindow`: the last N decisions by record count (class, confidence, unknown-token counts, review), with running sums so an observation costs O(1) and a summary O(classes).
//!
//! Exact and deterministic: confidences are summed as integer millionths, so
//! adding and removing the same record leaves the sums exactly as they were.

use std::sync::Arc;

/// Confidence histogram buckets: [0, 0.1), [0.1, 0.2), …, [0.9, 1.0].
pub const CONFIDENCE_BUCKETS: usize = 10;

/// Upper bounds of the confidence buckets (the last includes 1.0).
pub fn confidence_bucket_bounds() -> [f64; CONFIDENCE_BUCKETS] {
    std::array::from_fn(|i| (i + 1) as f64 / CONFIDENCE_BUCKETS as f64)
}

pub(crate) const NO_CLASS: u16 = u16::MAX;

#[derive(Debug, Clone, Copy, Default)]
struct Entry {
    class: u16,
    bucket: u8,
    review: bool,
    mostly_unknown: bool,
    confidence_micros: u32,
    known: u32,
    total: u32,
}

/// One decided record as the window sees it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observation {
    /// Index of the decided class in the window's class list; `None` if the class is not in it.
    pub class: Option<usize>,
    pub confidence: f64,
    /// Tokens of the record the model knows, and all its tokens.
    pub known_tokens: u32,
    pub total_tokens: u32,
    pub review: bool,
}

/// Counts over the records now in the window.
#[derive(Debug, Clone, PartialEq)]
pub struct WindowCounts {
    pub records: u64,
    /// Records observed since the window was made (or reset).
    pub observed: u64,
    pub class_counts: Vec<u64>,
    pub confidence_sum: f64,
    pub confidence_buckets: [u64; CONFIDENCE_BUCKETS],
    pub reviews: u64,
    pub known_tokens: u64,
    pub total_tokens: u64,
    pub mostly_unknown_records: u64,
}

impl WindowCounts {
    fn ratio(n: u64, d: u64) -> Option<f64> {
        (d > 0).then(|| n as f64 / d as f64)
    }
    pub fn confidence_mean(&self) -> Option<f64> {
        (self.records > 0).then(|| self.confidence_sum / self.records as f64)
    }
    pub fn review_ratio(&self) -> Option<f64> {
        Self::ratio(self.reviews, self.records)
    }
    /// Share of tokens unknown to the model.
    pub fn oov_token_ratio(&self) -> Option<f64> {
        Self::ratio(self.total_tokens - self.known_tokens, self.total_tokens)
    }
    /// Share of records with more than half their tokens unknown.
    pub fn oov_record_ratio(&self) -> Option<f64> {
        Self::ratio(self.mostly_unknown_records, self.records)
    }
}

/// The sliding window of decisions.
#[derive(Debug, Clone)]
pub struct DecisionWindow {
    capacity: usize,
    ring: Vec<Entry>,
    next: usize,
    classes: Vec<Arc<str>>,
    class_counts: Vec<u64>,
    bucket_counts: [u64; CONFIDENCE_BUCKETS],
    confidence_micros: u64,
    reviews: u64,
    known: u64,
    total: u64,
    mostly_unknown: u64,
    observed: u64,
}

impl DecisionWindow {
    /// A window of the last `capacity` records (at least 1) over `classes`.
    pub fn new(capacity: usize, classes: &[Arc<str>]) -> DecisionWindow {
        let capacity = capacity.max(1);
        DecisionWindow {
            capacity,
            ring: Vec::with_capacity(capacity),
            next: 0,
            classes: classes.to_vec(),
            class_counts: vec![0; classes.len()],
            bucket_counts: [0; CONFIDENCE_BUCKETS],
            confidence_micros: 0,
            reviews: 0,
            known: 0,
            total: 0,
            mostly_unknown: 0,
            observed: 0,
        }
    }

    pub fn capacity(&self) -> usize {
        self.capacity
    }

    pub fn classes(&self) -> &[Arc<str>] {
        &self.classes
    }

    pub fn len(&self) -> usize {
        self.ring.len()
    }

    pub fn is_empty(&self) -> bool {
        self.ring.is_empty()
    }

    /// Add one record, dropping the oldest once full.
    #[inline]
    /// Add one record; returns the class of the record it pushed out of a full window
    /// (`Some(None)` for one with no class), or `None` while the window is filling.
    pub fn observe(&mut self, o: &Observation) -> Option<Option<usize>> {
        let conf = if o.confidence.is_finite() { o.confidence.clamp(0.0, 1.0) } else { 0.0 };
        let known = o.known_tokens.min(o.total_tokens);
        let e = Entry {
            class: match o.class {
                Some(c) if c < self.class_counts.len() => c as u16,
                _ => NO_CLASS,
            },
            bucket: ((conf * CONFIDENCE_BUCKETS as f64) as usize).min(CONFIDENCE_BUCKETS - 1) as u8,
            review: o.review,
            mostly_unknown: 2 * (o.total_tokens - known) as u64 > o.total_tokens as u64,
            confidence_micros: (conf * 1e6).round() as u32,
            known,
            total: o.total_tokens,
        };
        let left = if self.ring.len() < self.capacity {
            self.ring.push(e);
            None
        } else {
            let old = std::mem::replace(&mut self.ring[self.next], e);
            self.remove(&old);
            Some((old.class != NO_CLASS).then_some(old.class as usize))
        };
        self.next = (self.next + 1) % self.capacity;
        self.add(&e);
        self.observed += 1;
        left
    }

    #[inline]
    fn add(&mut self, e: &Entry) {
        if e.class != NO_CLASS {
            self.class_counts[e.class as usize] += 1;
        }
        self.bucket_counts[e.bucket as usize] += 1;
        self.confidence_micros += e.confidence_micros as u64;
        self.reviews += e.review as u64;
        self.known += e.known as u64;
        self.total += e.total as u64;
        self.mostly_unknown += e.mostly_unknown as u64;
    }

    #[inline]
    fn remove(&mut self, e: &Entry) {
        if e.class != NO_CLASS {
            self.class_counts[e.class as usize] -= 1;
        }
        self.bucket_counts[e.bucket as usize] -= 1;
        self.confidence_micros -= e.confidence_micros as u64;
        self.reviews -= e.review as u64;
        self.known -= e.known as u64;
        self.total -= e.total as u64;
        self.mostly_unknown -= e.mostly_unknown as u64;
    }

    /// The counts now in the window.
    pub fn counts(&self) -> WindowCounts {
        WindowCounts {
            records: self.ring.len() as u64,
            observed: self.observed,
            class_counts: self.class_counts.clone(),
            confidence_sum: self.confidence_micros as f64 / 1e6,
            confidence_buckets: self.bucket_counts,
            reviews: self.reviews,
            known_tokens: self.known,
            total_tokens: self.total,
            mostly_unknown_records: self.mostly_unknown,
        }
    }

    /// The model's classes changed (a reload or a new class): keep every record,
    /// re-indexing its class by name; records of a class that is gone count for no class.
    pub fn set_classes(&mut self, classes: &[Arc<str>]) {
        if classes == self.classes.as_slice() {
            return;
        }
        let map = remap(&self.classes, classes);
        for e in &mut self.ring {
            if e.class != NO_CLASS {
                e.class = map[e.class as usize];
            }
        }
        self.class_counts = vec![0; classes.len()];
        for e in &self.ring {
            if e.class != NO_CLASS {
                self.class_counts[e.class as usize] += 1;
            }
        }
        self.classes = classes.to_vec();
    }
}

/// For each old class index, its index in `new` (or none).
pub(crate) fn remap(old: &[Arc<str>], new: &[Arc<str>]) -> Vec<u16> {
    old.iter().map(|c| new.iter().position(|n| n == c).map_or(NO_CLASS, |i| i as u16)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes(names: &[&str]) -> Vec<Arc<str>> {
        names.iter().map(|n| Arc::<str>::from(*n)).collect()
    }

    fn obs(class: usize, confidence: f64, known: u32, total: u32, review: bool) -> Observation {
        Observation { class: Some(class), confidence, known_tokens: known, total_tokens: total, review }
    }

    #[test]
    fn counts_only_the_last_n_records() {
        let mut w = DecisionWindow::new(3, &classes(&["a", "b"]));
        w.observe(&obs(0, 0.95, 10, 10, false));
        w.observe(&obs(0, 0.55, 2, 10, true));
        let c = w.counts();
        assert_eq!((c.records, c.class_counts.clone()), (2, vec![2, 0]));
        assert!((c.confidence_mean().unwrap() - 0.75).abs() < 1e-12);
        assert_eq!(c.review_ratio(), Some(0.5));
        assert_eq!(c.oov_token_ratio(), Some(8.0 / 20.0));
        assert_eq!(c.oov_record_ratio(), Some(0.5));
        assert_eq!(c.confidence_buckets[9], 1);
        assert_eq!(c.confidence_buckets[5], 1);
        w.observe(&obs(1, 0.5, 5, 10, false)); // exactly half unknown: not "more than half"
        w.observe(&obs(1, 1.0, 3, 3, false)); // pushes out the first record
        let c = w.counts();
        assert_eq!((c.records, c.observed), (3, 4));
        assert_eq!(c.class_counts, vec![1, 2]);
        assert!((c.confidence_sum - (0.55 + 0.5 + 1.0)).abs() < 1e-12);
        assert_eq!((c.reviews, c.known_tokens, c.total_tokens, c.mostly_unknown_records), (1, 10, 23, 1));
        assert_eq!(c.confidence_buckets.iter().sum::<u64>(), 3);
    }

    #[test]
    fn a_full_turn_of_the_window_leaves_exact_sums() {
        let mut w = DecisionWindow::new(50, &classes(&["a", "b", "c"]));
        for i in 0..50 {
            w.observe(&obs(i % 3, 0.337, 1, 7, i % 2 == 0));
        }
        let before = w.counts();
        for i in 0..50 {
            w.observe(&obs(i % 3, 0.337, 1, 7, i % 2 == 0));
        }
        let after = w.counts();
        assert_eq!(before.confidence_sum, after.confidence_sum);
        assert_eq!(before.class_counts, after.class_counts);
        assert_eq!(after.observed, 100);
    }

    #[test]
    fn class_list_changes_keep_records_by_name() {
        let mut w = DecisionWindow::new(10, &classes(&["b", "c"]));
        w.observe(&obs(0, 0.9, 1, 1, false));
        w.observe(&obs(1, 0.9, 1, 1, false));
        w.observe(&obs(1, 0.9, 1, 1, false));
        w.set_classes(&classes(&["a", "b", "c"]));
        assert_eq!(w.counts().class_counts, vec![0, 1, 2]);
        w.set_classes(&classes(&["a", "c"]));
        assert_eq!(w.counts().class_counts, vec![0, 2]);
        // The record of "b" is still in the window, for no class.
        assert_eq!(w.counts().records, 3);
        w.observe(&Observation { class: None, confidence: 0.2, known_tokens: 0, total_tokens: 0, review: true });
        assert_eq!(w.counts().class_counts, vec![0, 2]);
        assert_eq!(w.counts().oov_record_ratio(), Some(0.0));
    }
}
