//! Classification metrics from a confusion matrix: accuracy, per-class precision/recall/F1 and macro-F1 (zero when undefined).

use serde::Serialize;

/// Counts of (true class, predicted class).
#[derive(Debug, Clone, PartialEq)]
pub struct Confusion {
    pub k: usize,
    pub cells: Vec<u64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassMetrics {
    pub class: String,
    pub precision: f64,
    pub recall: f64,
    pub f1: f64,
    pub support: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Metrics {
    pub n: u64,
    pub accuracy: f64,
    pub macro_f1: f64,
    pub per_class: Vec<ClassMetrics>,
    pub classes: Vec<String>,
    /// Rows are true classes, columns predicted classes.
    pub confusion: Vec<Vec<u64>>,
}

impl Confusion {
    pub fn new(k: usize) -> Confusion {
        Confusion { k, cells: vec![0; k * k] }
    }

    pub fn add(&mut self, truth: usize, predicted: usize) {
        self.cells[truth * self.k + predicted] += 1;
    }

    pub fn merge(&mut self, other: &Confusion) {
        for (a, b) in self.cells.iter_mut().zip(&other.cells) {
            *a += b;
        }
    }

    pub fn total(&self) -> u64 {
        self.cells.iter().sum()
    }

    pub fn correct(&self) -> u64 {
        (0..self.k).map(|i| self.cells[i * self.k + i]).sum()
    }

    pub fn accuracy(&self) -> f64 {
        let n = self.total();
        if n == 0 {
            0.0
        } else {
            self.correct() as f64 / n as f64
        }
    }

    /// Per-class metrics; precision or recall with a zero denominator is 0
    /// (the usual `zero_division=0` convention).
    pub fn per_class(&self, classes: &[String]) -> Vec<ClassMetrics> {
        let k = self.k;
        (0..k)
            .map(|c| {
                let tp = self.cells[c * k + c] as f64;
                let predicted: u64 = (0..k).map(|t| self.cells[t * k + c]).sum();
                let support: u64 = (0..k).map(|p| self.cells[c * k + p]).sum();
                let precision = if predicted == 0 { 0.0 } else { tp / predicted as f64 };
                let recall = if support == 0 { 0.0 } else { tp / support as f64 };
                let f1 = if precision + recall == 0.0 { 0.0 } else { 2.0 * precision * recall / (precision + recall) };
                ClassMetrics { class: classes[c].clone(), precision, recall, f1, support }
            })
            .collect()
    }

    /// Macro-F1 over the classes that have support or predictions.
    pub fn macro_f1(&self, classes: &[String]) -> f64 {
        let pc = self.per_class(classes);
        let k = self.k;
        let present: Vec<&ClassMetrics> = pc
            .iter()
            .enumerate()
            .filter(|(c, m)| m.support > 0 || (0..k).any(|t| self.cells[t * k + c] > 0))
            .map(|(_, m)| m)
            .collect();
        if present.is_empty() {
            0.0
        } else {
            present.iter().map(|m| m.f1).sum::<f64>() / present.len() as f64
        }
    }

    pub fn metrics(&self, classes: &[String]) -> Metrics {
        Metrics {
            n: self.total(),
            accuracy: self.accuracy(),
            macro_f1: self.macro_f1(classes),
            per_class: self.per_class(classes),
            classes: classes.to_vec(),
            confusion: (0..self.k).map(|t| self.cells[t * self.k..(t + 1) * self.k].to_vec()).collect(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_computed_metrics() {
        // truth a a a b b c ; predicted a a b b c c
        let classes: Vec<String> = ["a", "b", "c"].iter().map(|s| s.to_string()).collect();
        let mut m = Confusion::new(3);
        for (t, p) in [(0, 0), (0, 0), (0, 1), (1, 1), (1, 2), (2, 2)] {
            m.add(t, p);
        }
        assert!((m.accuracy() - 4.0 / 6.0).abs() < 1e-12);
        let pc = m.per_class(&classes);
        assert!((pc[0].precision - 1.0).abs() < 1e-12 && (pc[0].recall - 2.0 / 3.0).abs() < 1e-12);
        assert!((pc[1].precision - 0.5).abs() < 1e-12 && (pc[1].recall - 0.5).abs() < 1e-12);
        assert!((pc[2].precision - 0.5).abs() < 1e-12 && (pc[2].recall - 1.0).abs() < 1e-12);
        let f1a = 2.0 * 1.0 * (2.0 / 3.0) / (1.0 + 2.0 / 3.0);
        let f1c = 2.0 * 0.5 / 1.5;
        assert!((m.macro_f1(&classes) - (f1a + 0.5 + f1c) / 3.0).abs() < 1e-12);
        assert_eq!(m.metrics(&classes).confusion, vec![vec![2, 1, 0], vec![0, 1, 1], vec![0, 0, 1]]);
    }

    #[test]
    fn zero_division_is_zero() {
        let classes: Vec<String> = ["a", "b"].iter().map(|s| s.to_string()).collect();
        let mut m = Confusion::new(2);
        m.add(0, 0);
        let pc = m.per_class(&classes);
        assert_eq!((pc[1].precision, pc[1].recall, pc[1].f1), (0.0, 0.0, 0.0));
        assert_eq!(m.macro_f1(&classes), 1.0, "absent classes do not count");
    }
}
