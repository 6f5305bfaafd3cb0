//! Scoring in log space: joint log likelihoods as sums of cached log weights, posteriors by log-sum-exp, margin to the runner-up.

use crate::features::Vocabulary;
use crate::text::TermBag;

use super::nb::Model;
use super::rows::Place;

/// Reusable buffers for scoring, one per worker.
#[derive(Debug, Default, Clone)]
pub struct ScoreScratch {
    /// Joint log likelihood per class, after `score`.
    pub scores: Vec<f64>,
    /// Known terms of the last record: (row, weight, index in the bag).
    pub hits: Vec<(u32, f64, u32)>,
    /// Where the rows of `hits` live, while scoring.
    places: Vec<Place>,
}

/// The outcome of scoring one record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scored {
    pub best: usize,
    pub runner_up: Option<usize>,
    /// Posterior probability of `best`.
    pub confidence: f64,
    /// Joint log-likelihood gap between `best` and the runner-up (∞ without one).
    pub margin: f64,
    /// Weight of the terms the model knows, and of all terms.
    pub known_weight: f64,
    pub total_weight: f64,
    pub known_terms: u32,
    pub total_terms: u32,
}

impl Model {
    /// Score a record. Unknown terms are ignored, as a fixed-vocabulary
    /// reference implementation does. Ties go to the lowest class index.
    pub fn score(&self, bag: &TermBag, s: &mut ScoreScratch) -> Scored {
        s.scores.clear();
        s.scores.extend_from_slice(&self.log_prior);
        s.hits.clear();
        let interned = matches!(self.vocab, Vocabulary::Interned(_));
        let mut known_w = 0.0;
        let mut total_w = 0.0;
        // Three passes, so the memory reads of different terms overlap instead of
        // waiting on each other: every vocabulary probe, every row's place, every row.
        for i in 0..bag.len() {
            let (term, w) = bag.get(i);
            total_w += w;
            if let Some(id) = self.vocab.lookup(term) {
                s.hits.push((id, w, i as u32));
            }
        }
        s.places.clear();
        s.places.extend(s.hits.iter().map(|h| self.cells.place(h.0)));
        let mut kept = 0;
        for j in 0..s.hits.len() {
            let (_, w, _) = s.hits[j];
            let (row_total, row) = self.cells.weights_at(s.places[j]);
            if interned && row_total == 0.0 {
                continue;
            }
            known_w += w;
            s.hits[kept] = s.hits[j];
            kept += 1;
            for (acc, lw) in s.scores.iter_mut().zip(row) {
                *acc += w * lw;
            }
        }
        s.hits.truncate(kept);
        for (acc, n) in s.scores.iter_mut().zip(&self.norm) {
            *acc -= known_w * n;
        }
        let (best, runner_up) = top_two(&s.scores);
        let lse = log_sum_exp(&s.scores);
        let confidence = if s.scores[best].is_finite() { (s.scores[best] - lse).exp() } else { 0.0 };
        let margin = match runner_up {
            Some(r) if s.scores[r].is_finite() => s.scores[best] - s.scores[r],
            _ => f64::INFINITY,
        };
        Scored {
            best,
            runner_up,
            confidence,
            margin,
            known_weight: known_w,
            total_weight: total_w,
            known_terms: s.hits.len() as u32,
            total_terms: bag.len() as u32,
        }
    }

    /// Posterior probabilities of every class for the scores in `s`.
    pub fn posteriors(scores: &[f64]) -> Vec<f64> {
        let lse = log_sum_exp(scores);
        scores.iter().map(|&x| if x.is_finite() { (x - lse).exp() } else { 0.0 }).collect()
    }
}

/// ln Σ exp(xᵢ), shifted by the maximum so nothing overflows or underflows.
pub fn log_sum_exp(xs: &[f64]) -> f64 {
    let m = xs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !m.is_finite() {
        return m;
    }
    m + xs.iter().map(|&x| (x - m).exp()).sum::<f64>().ln()
}

/// Index of the largest score (lowest index on ties) and of the second.
pub fn top_two(xs: &[f64]) -> (usize, Option<usize>) {
    let mut best = 0;
    for (i, &x) in xs.iter().enumerate().skip(1) {
        if x > xs[best] {
            best = i;
        }
    }
    let mut second: Option<usize> = None;
    for (i, &x) in xs.iter().enumerate() {
        if i != best && second.is_none_or(|s| x > xs[s]) {
            second = Some(i);
        }
    }
    (best, second)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::Vocabulary;
    use crate::model::NbParams;
    use crate::settings::{Settings, VocabularyKind};

    fn trained() -> Model {
        let mut m = Model::new(
            NbParams::multinomial(1.0),
            Settings::defaults().analyzer,
            vec!["billing".into(), "shipping".into()],
            Vocabulary::new(VocabularyKind::Interned, 100, 0),
        )
        .unwrap();
        m.learn(&TermBag::from_pairs([("refund", 1.0), ("card", 1.0)]), "billing", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("parcel", 1.0), ("late", 1.0)]), "shipping", 1.0).unwrap();
        m
    }

    #[test]
    fn hand_computed_scores() {
        // V = 4, N_c = 2, α = 1: ln P(refund|billing) = ln(2/6), ln P(refund|shipping) = ln(1/6).
        let m = trained();
        let mut s = ScoreScratch::default();
        let r = m.score(&TermBag::from_pairs([("refund", 1.0), ("unknown", 1.0)]), &mut s);
        let expect_b = 0.5f64.ln() + (2.0f64 / 6.0).ln();
        let expect_s = 0.5f64.ln() + (1.0f64 / 6.0).ln();
        assert!((s.scores[0] - expect_b).abs() < 1e-12);
        assert!((s.scores[1] - expect_s).abs() < 1e-12);
        assert_eq!(r.best, 0);
        assert!((r.confidence - 2.0 / 3.0).abs() < 1e-12);
        assert!((r.margin - 2f64.ln()).abs() < 1e-12);
        assert_eq!((r.known_terms, r.total_terms), (1, 2));
    }

    #[test]
    fn ties_break_by_class_index() {
        let m = trained();
        let mut s = ScoreScratch::default();
        let r = m.score(&TermBag::new(), &mut s);
        assert_eq!(r.best, 0);
        assert_eq!(r.runner_up, Some(1));
        assert_eq!(r.margin, 0.0);
        assert_eq!(top_two(&[1.0, 3.0, 3.0]), (1, Some(2)));
    }

    #[test]
    fn no_underflow_on_200k_tokens() {
        // Common practice: sums of log probabilities instead of products.
        let m = trained();
        let mut bag = TermBag::new();
        for i in 0..200_000 {
            bag.push(if i % 3 == 0 { "parcel" } else { "refund" }, 1.0);
        }
        let mut s = ScoreScratch::default();
        let r = m.score(&bag, &mut s);
        assert!(s.scores.iter().all(|x| x.is_finite()), "{:?}", s.scores);
        let post = Model::posteriors(&s.scores);
        assert!(post.iter().all(|p| p.is_finite() && *p >= 0.0));
        assert!((post.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        assert_eq!(r.best, 0);
        assert!(r.confidence > 0.999 && r.confidence <= 1.0);
    }

    #[test]
    fn log_sum_exp_is_stable() {
        assert!((log_sum_exp(&[-1000.0, -1000.0]) - (-1000.0 + 2f64.ln())).abs() < 1e-12);
        assert!((log_sum_exp(&[1000.0, 0.0]) - 1000.0).abs() < 1e-12);
        assert_eq!(log_sum_exp(&[f64::NEG_INFINITY, f64::NEG_INFINITY]), f64::NEG_INFINITY);
    }
}
