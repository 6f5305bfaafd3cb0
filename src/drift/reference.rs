//! The reference class mix that the window is compared with: the model's training priors (its document counts), or a baseline window of the first N records, pinned.

use std::sync::Arc;

use serde::Serialize;

use super::window::remap;

/// Where the reference comes from (setting `drift.reference`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReferenceKind {
    /// The served model's document counts per class, normalised.
    Priors,
    /// The predicted-class mix of the first `drift.baseline_records` records, pinned.
    Baseline,
}

/// A pinned baseline: class counts of the first `target` records observed.
#[derive(Debug, Clone)]
pub struct Baseline {
    target: u64,
    seen: u64,
    classes: Vec<Arc<str>>,
    counts: Vec<u64>,
}

impl Baseline {
    pub fn new(target: u64, classes: &[Arc<str>]) -> Baseline {
        Baseline { target: target.max(1), seen: 0, classes: classes.to_vec(), counts: vec![0; classes.len()] }
    }

    /// Count one record's class while the baseline is still filling.
    #[inline]
    pub fn observe(&mut self, class: Option<usize>) {
        if self.seen < self.target {
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

    /// Start again (after a reload: the new model may route differently on purpose).
    pub fn repin(&mut self) {
        self.seen = 0;
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
        let mut b = Baseline::new(3, &classes(&["a", "b"]));
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
}
