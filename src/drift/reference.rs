//! The reference class mix that the window is compared with: the model's training priors (its document counts), a baseline of N records pinned after a warm-up, or the trailing N records just before the window.

use std::collections::VecDeque;
use std::sync::Arc;

use serde::Serialize;

use super::window::{remap, NO_CLASS};

/// Where the reference comes from (setting `drift.reference`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReferenceKind {
    /// The served model's document counts per class, normalised.
    Priors,
    /// The predicted-class mix of `drift.baseline_records` records, pinned after the first
    /// `drift.baseline_skip_records` (a warm-up) are passed over.
    Baseline,
    /// The predicted-class mix of the `drift.baseline_records` records just before the
    /// window: a change shows as a rise, and fades once the new mix fills both.
    Trailing,
}

/// A pinned baseline: class counts of the `target` records observed after the first `skip`.
#[derive(Debug, Clone)]
pub struct Baseline {
    skip: u64,
    skipped: u64,
    target: u64,
    seen: u64,
    classes: Vec<Arc<str>>,
    counts: Vec<u64>,
}

impl Baseline {
    pub fn new(skip: u64, target: u64, classes: &[Arc<str>]) -> Baseline {
        Baseline { skip, skipped: 0, target: target.max(1), seen: 0, classes: classes.to_vec(), counts: vec![0; classes.len()] }
    }

    /// Count one record's class while the baseline is still filling (after the warm-up).
    #[inline]
    pub fn observe(&mut self, class: Option<usize>) {
        if self.skipped < self.skip {
            self.skipped += 1;
        } else if self.seen < self.target {
            self.seen += 1;
            if let Some(c) = class.filter(|c| *c < self.counts.len()) {
                self.counts[c] += 1;
            }
        }
    }

    pub fn is_pinned(&self) -> bool {
        self.seen >= self.target
    }

    /// Records counted so far (at most the target).
    pub fn seen(&self) -> u64 {
        self.seen
    }

    /// The pinned counts, once the baseline has its records.
    pub fn counts(&self) -> Option<&[u64]> {
        self.is_pinned().then_some(self.counts.as_slice())
    }

    /// Re-index by class name; a new class starts at zero.
    pub fn set_classes(&mut self, classes: &[Arc<str>]) {
        if classes == self.classes.as_slice() {
            return;
        }
        let map = remap(&self.classes, classes);
        let mut counts = vec![0; classes.len()];
        for (old, n) in self.counts.iter().enumerate() {
            if let Some(&i) = map.get(old).filter(|i| (**i as usize) < counts.len()) {
                counts[i as usize] += n;
            }
        }
        self.counts = counts;
        self.classes = classes.to_vec();
    }

    /// Start again, warm-up included (after a reload: the new model may route differently on purpose).
    pub fn repin(&mut self) {
        self.skipped = 0;
        self.seen = 0;
        self.counts.iter_mut().for_each(|c| *c = 0);
    }
}

/// The trailing reference: class counts of the last `capacity` records that left the window.
#[derive(Debug, Clone)]
pub struct Trailing {
    capacity: usize,
    ring: VecDeque<u16>,
    classes: Vec<Arc<str>>,
    counts: Vec<u64>,
}

impl Trailing {
    pub fn new(capacity: u64, classes: &[Arc<str>]) -> Trailing {
        let capacity = capacity.max(1) as usize;
        Trailing { capacity, ring: VecDeque::with_capacity(capacity), classes: classes.to_vec(), counts: vec![0; classes.len()] }
    }

    /// A record that left the window, with its class.
    #[inline]
    pub fn push(&mut self, class: Option<usize>) {
        if self.ring.len() == self.capacity {
            if let Some(old) = self.ring.pop_front().filter(|&c| c != NO_CLASS) {
                self.counts[old as usize] -= 1;
            }
        }
        let c = class.filter(|&c| c < self.counts.len()).map_or(NO_CLASS, |c| c as u16);
        if c != NO_CLASS {
            self.counts[c as usize] += 1;
        }
        self.ring.push_back(c);
    }

    /// Records held (at most the capacity).
    pub fn seen(&self) -> u64 {
        self.ring.len() as u64
    }

    /// The counts, once it holds `capacity` records.
    pub fn counts(&self) -> Option<&[u64]> {
        (self.ring.len() == self.capacity).then_some(self.counts.as_slice())
    }

    /// Re-index by class name; a record of a class that is gone keeps its place, classless.
    pub fn set_classes(&mut self, classes: &[Arc<str>]) {
        if classes == self.classes.as_slice() {
            return;
        }
        let map = remap(&self.classes, classes);
        self.counts = vec![0; classes.len()];
        for c in self.ring.iter_mut().filter(|c| **c != NO_CLASS) {
            *c = map[*c as usize];
            if *c != NO_CLASS {
                self.counts[*c as usize] += 1;
            }
        }
        self.classes = classes.to_vec();
    }

    /// Start again (after a reload).
    pub fn clear(&mut self) {
        self.ring.clear();
        self.counts.iter_mut().for_each(|c| *c = 0);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes(names: &[&str]) -> Vec<Arc<str>> {
        names.iter().map(|n| Arc::<str>::from(*n)).collect()
    }

    #[test]
    fn pins_after_the_target_and_ignores_later_records() {
        let mut b = Baseline::new(0, 3, &classes(&["a", "b"]));
        b.observe(Some(0));
        b.observe(Some(1));
        assert_eq!(b.counts(), None);
        b.observe(Some(1));
        b.observe(Some(0));
        assert_eq!(b.counts(), Some(&[1u64, 2][..]));
        b.set_classes(&classes(&["b", "c", "a"]));
        assert_eq!(b.counts(), Some(&[2u64, 0, 1][..]));
        b.repin();
        assert_eq!((b.counts(), b.seen()), (None, 0));
    }

    #[test]
    fn a_warm_up_is_passed_over_before_the_baseline_fills_and_again_after_a_repin() {
        let mut b = Baseline::new(2, 2, &classes(&["a", "b"]));
        // Warm-up: the first two records are not counted, whatever their class.
        b.observe(Some(0));
        b.observe(Some(0));
        assert_eq!((b.counts(), b.seen()), (None, 0));
        b.observe(Some(1));
        b.observe(Some(1));
        b.observe(Some(0));
        assert_eq!(b.counts(), Some(&[0u64, 2][..]));
        b.repin();
        for c in [0, 0, 0, 1] {
            b.observe(Some(c));
        }
        assert_eq!(b.counts(), Some(&[1u64, 1][..]), "the warm-up applies again after a repin");
    }

    #[test]
    fn trailing_counts_the_last_records_that_left_the_window() {
        let mut t = Trailing::new(3, &classes(&["a", "b"]));
        t.push(Some(0));
        t.push(None);
        assert_eq!((t.counts(), t.seen()), (None, 2));
        t.push(Some(1));
        assert_eq!(t.counts(), Some(&[1u64, 1][..]));
        t.push(Some(1)); // the first record (a) leaves
        assert_eq!(t.counts(), Some(&[0u64, 2][..]));
        t.push(Some(1)); // the classless one leaves
        assert_eq!(t.counts(), Some(&[0u64, 3][..]));
        t.set_classes(&classes(&["b"]));
        assert_eq!(t.counts(), Some(&[3u64][..]));
        t.clear();
        assert_eq!((t.counts(), t.seen()), (None, 0));
    }
}
