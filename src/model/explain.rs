//! Explanations: the record's terms that pushed the decision most towards the winning class and away from the runner-up.
//!
//! A term's contribution is `w · ((ln θ_t,best − norm_best) − (ln θ_t,second − norm_second))`:
//! its share of the log-score margin. Contributions plus the prior gap sum to the margin.

use serde::Serialize;

use crate::text::TermBag;

use super::nb::Model;
use super::score::{ScoreScratch, Scored};

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TermContribution {
    pub term: String,
    pub weight: f64,
}

impl Model {
    /// Up to `n` terms with the largest positive contribution, largest first.
    pub fn explain(&self, bag: &TermBag, s: &ScoreScratch, scored: &Scored, n: usize) -> Vec<TermContribution> {
        if n == 0 || s.hits.is_empty() {
            return Vec::new();
        }
        let b = scored.best;
        let r = scored.runner_up;
        let mut hits: Vec<(u32, f64, u32)> = s.hits.clone();
        hits.sort_unstable_by_key(|h| h.0);
        let mut agg: Vec<(f64, u32)> = Vec::with_capacity(hits.len());
        let mut i = 0;
        while i < hits.len() {
            let (id, _, first) = hits[i];
            let mut w = 0.0;
            while i < hits.len() && hits[i].0 == id {
                w += hits[i].1;
                i += 1;
            }
            let row = self.cells.logw(id);
            let own = row[b] - self.norm[b];
            let c = match r {
                Some(r) => w * (own - (row[r] - self.norm[r])),
                None => w * own,
            };
            agg.push((c, first));
        }
        agg.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)));
        agg.into_iter()
            .filter(|(c, _)| *c > 0.0)
            .take(n)
            .map(|(c, idx)| TermContribution { term: bag.get(idx as usize).0.to_string(), weight: round6(c) })
            .collect()
    }
}

fn round6(x: f64) -> f64 {
    (x * 1e6).round() / 1e6
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::Vocabulary;
    use crate::model::NbParams;
    use crate::settings::{Settings, VocabularyKind};

    #[test]
    fn contributions_sum_to_the_margin() {
        let mut m = Model::new(
            NbParams::multinomial(0.5),
            Settings::defaults().analyzer,
            vec!["billing".into(), "shipping".into()],
            Vocabulary::new(VocabularyKind::Interned, 100, 0),
        )
        .unwrap();
        m.learn(&TermBag::from_pairs([("refund", 2.0), ("card", 1.0), ("late", 1.0)]), "billing", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("parcel", 1.0), ("late", 2.0)]), "shipping", 1.0).unwrap();
        let bag = TermBag::from_pairs([("refund", 1.0), ("card", 1.0), ("refund", 1.0), ("late", 1.0)]);
        let mut s = ScoreScratch::default();
        let r = m.score(&bag, &mut s);
        assert_eq!(r.best, 0);
        let all = m.explain(&bag, &s, &r, 10);
        assert_eq!(all[0].term, "refund");
        assert_eq!(all.len(), 2, "late points to shipping, so only two positive terms: {all:?}");
        // Including the negative one, contributions + prior gap = margin.
        let mut total = m.log_prior[0] - m.log_prior[1];
        for (t, w) in bag.iter() {
            let id = m.vocabulary().lookup(t).unwrap();
            let logw = m.cells.logw(id);
            total += w * ((logw[0] - m.norm[0]) - (logw[1] - m.norm[1]));
        }
        assert!((total - r.margin).abs() < 1e-9);
        assert_eq!(m.explain(&bag, &s, &r, 1).len(), 1);
    }
}
