//! Unknown tokens of one record from the model's view: a token is known when the model has counted it in training (its row has a non-zero total).
//!
//! When the model scored the record, its scratch already holds the rows it
//! found, so this costs nothing extra; when a rule decided without scoring,
//! `known_tokens` looks the terms up once.

use crate::features::Vocabulary;
use crate::model::{Model, ScoreScratch, Scored};
use crate::text::TermBag;

/// (known tokens, all tokens) of `bag`.
pub fn known_tokens(model: &Model, bag: &TermBag) -> (u32, u32) {
    let mut known = 0u32;
    for (term, _) in bag.iter() {
        if let Some(id) = model.vocabulary().lookup(term) {
            if (id as usize) < model.rows() && model.row_total(id) != 0.0 {
                known += 1;
            }
        }
    }
    (known, bag.len() as u32)
}

/// (known tokens, all tokens) from a score just computed with `scratch`. With an
/// interned vocabulary the scorer already skipped unseen terms; with feature
/// hashing every term lands in a bucket, so empty buckets are counted as unknown here.
#[inline]
pub fn known_from_score(model: &Model, scored: &Scored, scratch: &ScoreScratch) -> (u32, u32) {
    match model.vocabulary() {
        Vocabulary::Interned { .. } => (scored.known_terms, scored.total_terms),
        Vocabulary::Hashed { .. } => {
            let known = scratch.hits.iter().filter(|(id, _, _)| model.row_total(*id) != 0.0).count() as u32;
            (known, scored.total_terms)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::NbParams;
    use crate::settings::{Settings, VocabularyKind};

    fn model(kind: VocabularyKind) -> Model {
        let mut m = Model::new(
            NbParams::multinomial(1.0),
            Settings::defaults().analyzer,
            vec!["billing".into(), "shipping".into()],
            Vocabulary::new(kind, 100, 64),
        )
        .unwrap();
        m.learn(&TermBag::from_pairs([("refund", 1.0), ("card", 1.0)]), "billing", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("parcel", 1.0)]), "shipping", 1.0).unwrap();
        m
    }

    #[test]
    fn counts_agree_with_and_without_a_score() {
        for kind in [VocabularyKind::Interned, VocabularyKind::Hashed] {
            let m = model(kind);
            let bag = TermBag::from_pairs([("refund", 2.0), ("glowring", 1.0), ("parcel", 1.0), ("firmware", 1.0), ("refund", 1.0)]);
            let mut s = ScoreScratch::default();
            let scored = m.score(&bag, &mut s);
            let direct = known_tokens(&m, &bag);
            assert_eq!(direct, (3, 5), "{kind:?}");
            // Hashed: an unseen term may share a bucket with a seen one; not with these 64 buckets.
            assert_eq!(known_from_score(&m, &scored, &s), direct, "{kind:?}");
        }
    }
}
