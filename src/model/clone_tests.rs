//! Tests of cheap clones: a clone shares the model's storage, later learning never shows through a clone, and cloning changes no count, score or fingerprint.

use crate::eval::folds::SplitMix64;
use crate::features::interned::{DELTA_FRACTION, DELTA_MIN};
use crate::features::Vocabulary;
use crate::settings::{ModelKind, Settings, VocabularyKind};
use crate::text::TermBag;

use super::rows::SEGMENT_ROWS;
use super::{Model, NbParams, ScoreScratch};

const CLASSES: [&str; 4] = ["access", "billing", "returns", "shipping"];

fn model(kind: ModelKind, vocab: VocabularyKind) -> Model {
    Model::new(
        NbParams { kind, ..NbParams::multinomial(0.5) },
        Settings::defaults().analyzer,
        CLASSES.iter().map(|c| c.to_string()).collect(),
        Vocabulary::new(vocab, 1_000_000, 4096),
    )
    .unwrap()
}

/// A record of 6 to 12 terms: mostly from a common pool of 300, sometimes a
/// term never used before (vocabulary growth); weights are multiples of 1/16.
fn record(rng: &mut SplitMix64, fresh: &mut usize) -> (TermBag, &'static str, f64) {
    let mut bag = TermBag::new();
    for _ in 0..6 + rng.below(7) {
        if rng.below(4) == 0 {
            bag.push(&format!("new{fresh}"), 1.0);
            *fresh += 1;
        } else {
            bag.push(&format!("w{}", rng.below(300)), [1.0, 2.0, 0.5][rng.below(3) as usize]);
        }
    }
    (bag, CLASSES[rng.below(4) as usize], [1.0, 1.5, 0.25][rng.below(3) as usize])
}

/// Every score (as bits) and outcome of `m` on `probes`.
fn scores(m: &Model, probes: &[TermBag]) -> Vec<(Vec<u64>, usize, u64)> {
    let mut s = ScoreScratch::default();
    probes
        .iter()
        .map(|p| {
            let r = m.score(p, &mut s);
            (s.scores.iter().map(|x| x.to_bits()).collect(), r.best, r.confidence.to_bits())
        })
        .collect()
}

fn probes() -> Vec<TermBag> {
    let mut rng = SplitMix64::new(99);
    let mut fresh = 0;
    let mut out: Vec<TermBag> = (0..40).map(|_| record(&mut rng, &mut fresh).0).collect();
    out.push(TermBag::from_pairs([("w1", 1.0), ("new5", 1.0), ("never-seen", 1.0)]));
    out
}

#[test]
fn a_clone_shares_all_storage_and_a_learn_copies_only_the_rows_it_writes() {
    let mut a = model(ModelKind::Multinomial, VocabularyKind::Interned);
    let mut rng = SplitMix64::new(1);
    let mut fresh = 0;
    for _ in 0..400 {
        let (bag, c, w) = record(&mut rng, &mut fresh);
        a.learn(&bag, c, w).unwrap();
    }
    // Filler terms after them, so the rows above sit in full segments.
    let filler: Vec<String> = (0..2 * SEGMENT_ROWS).map(|i| format!("filler{i}")).collect();
    a.learn(&TermBag::from_pairs(filler.iter().map(|t| (t.as_str(), 1.0))), "returns", 1.0).unwrap();
    let view = a.clone();
    let rows = a.rows();
    let s = a.row_sharing(&view);
    assert_eq!((s.shared_rows, s.rows), (rows, rows), "a fresh clone copies no row");
    let Vocabulary::Interned(va) = &a.vocab else { unreachable!() };
    let Vocabulary::Interned(vv) = &view.vocab else { unreachable!() };
    let (same_base, (shared_text, text_chunks)) = va.sharing(vv);
    assert!(same_base);
    assert_eq!(shared_text, text_chunks);

    // The first write after a clone may also carry the rows of a sparse open
    // segment forward (at most half a segment), so small segments do not pile up.
    a.learn(&TermBag::from_pairs([("w1", 1.0)]), "billing", 1.0).unwrap();
    let first = a.row_sharing(&view);
    assert!(first.shared_rows < rows && rows - first.shared_rows <= 1 + SEGMENT_ROWS / 2, "{first:?}");
    // Then: two known terms not yet written, one of them twice: exactly two rows are copied.
    let unmoved = |t: &String| match a.vocab.lookup(t) {
        Some(id) => std::ptr::eq(a.cells.counts(id).as_ptr(), view.cells.counts(id).as_ptr()),
        None => false,
    };
    let fresh_terms: Vec<String> = (2..300).map(|i| format!("w{i}")).filter(unmoved).take(2).collect();
    assert_eq!(fresh_terms.len(), 2, "two rows still shared with the view");
    let (t1, t2) = (fresh_terms[0].as_str(), fresh_terms[1].as_str());
    a.learn(&TermBag::from_pairs([(t1, 1.0), (t2, 1.0), (t1, 1.0)]), "billing", 1.0).unwrap();
    let s = a.row_sharing(&view);
    assert_eq!((s.shared_rows, s.rows), (first.shared_rows - 2, rows));
    assert_eq!(s.slots, first.slots + 2, "the two moved rows, and nothing else, were copied");
    // The same rows again: written in place, nothing more is copied.
    a.learn(&TermBag::from_pairs([(t2, 1.0)]), "access", 1.0).unwrap();
    assert_eq!(a.row_sharing(&view), s);
    // A new term: one new row, which the view does not have.
    a.learn(&TermBag::from_pairs([("brand-new", 1.0)]), "access", 1.0).unwrap();
    let n = a.row_sharing(&view);
    assert_eq!((n.shared_rows, n.rows, n.slots), (s.shared_rows, rows + 1, s.slots + 1));
    assert_eq!(view.rows(), rows);
}

#[test]
fn learning_after_a_clone_leaves_the_clone_exactly_as_it_was() {
    for kind in [ModelKind::Multinomial, ModelKind::Complement] {
        for vocab in [VocabularyKind::Interned, VocabularyKind::Hashed] {
            let mut a = model(kind, vocab);
            let mut rng = SplitMix64::new(2);
            let mut fresh = 0;
            for _ in 0..200 {
                let (bag, c, w) = record(&mut rng, &mut fresh);
                a.learn(&bag, c, w).unwrap();
            }
            let probes = probes();
            let view = a.clone();
            let (fp, sc, counts) = (view.fingerprint(), scores(&view, &probes), view.term_counts());
            let (rows, size) = (view.rows(), view.vocabulary_size());
            let mut learned = Vec::new();
            for _ in 0..50 {
                let (bag, c, w) = record(&mut rng, &mut fresh);
                a.learn(&bag, c, w).unwrap();
                learned.push((bag, c, w));
            }
            a.unlearn(&learned[3].0, learned[3].1, learned[3].2).unwrap();
            assert_ne!(a.fingerprint(), fp, "{kind:?} {vocab:?}: the original changed");
            assert_ne!(scores(&a, &probes), sc, "{kind:?} {vocab:?}");
            assert_eq!(view.fingerprint(), fp, "{kind:?} {vocab:?}: the clone did not");
            assert_eq!(scores(&view, &probes), sc, "{kind:?} {vocab:?}");
            assert_eq!(view.term_counts(), counts);
            assert_eq!((view.rows(), view.vocabulary_size()), (rows, size));
            if vocab == VocabularyKind::Interned {
                assert!(a.rows() > rows, "new terms went to the original only");
                assert_eq!(view.vocabulary().lookup(&format!("new{}", fresh - 1)), None);
            }
        }
    }
}

#[test]
fn many_clone_and_learn_cycles_equal_a_model_that_never_cloned() {
    for kind in [ModelKind::Multinomial, ModelKind::Complement] {
        for vocab in [VocabularyKind::Interned, VocabularyKind::Hashed] {
            let mut cloned = model(kind, vocab);
            let mut plain = model(kind, vocab);
            let mut rng = SplitMix64::new(3);
            let mut fresh = 0;
            let mut views: Vec<Model> = Vec::new();
            let mut history = Vec::new();
            for cycle in 0..60 {
                // Publish: a view stays alive while the working copy learns on.
                views.push(cloned.clone());
                if views.len() > 3 {
                    views.remove(0);
                }
                for _ in 0..50 {
                    let (bag, c, w) = record(&mut rng, &mut fresh);
                    cloned.learn(&bag, c, w).unwrap();
                    plain.learn(&bag, c, w).unwrap();
                    history.push((bag, c, w));
                }
                // A correction now and then: unlearn an old record, learn it as another class.
                let at = cycle * 7 % history.len();
                let (bag, c, w) = history[at].clone();
                cloned.unlearn(&bag, c, w).unwrap();
                plain.unlearn(&bag, c, w).unwrap();
                cloned.learn(&bag, "returns", w).unwrap();
                plain.learn(&bag, "returns", w).unwrap();
                history[at].1 = "returns";
            }
            assert_eq!(cloned.fingerprint(), plain.fingerprint(), "{kind:?} {vocab:?}");
            assert_eq!(cloned.term_counts(), plain.term_counts());
            assert_eq!(cloned.cells.logw_flat(), plain.cells.logw_flat());
            assert_eq!((cloned.norm.clone(), cloned.log_prior.clone()), (plain.norm.clone(), plain.log_prior.clone()));
            assert_eq!(scores(&cloned, &probes()), scores(&plain, &probes()));
            assert_eq!(cloned.vocabulary(), plain.vocabulary(), "same terms in the same row order");
            if let Vocabulary::Interned(v) = &cloned.vocab {
                // ~3,700 new terms: the delta was folded into the base several times,
                // mostly while views shared the base.
                assert!(v.len() > 4 * DELTA_MIN, "{} terms", v.len());
                assert!(v.compactions() >= 3, "{} compactions", v.compactions());
                assert!(v.delta_len() < DELTA_MIN.max(v.len() / DELTA_FRACTION));
            }
        }
    }
}

#[test]
fn add_class_and_reorder_after_a_clone_change_only_the_original() {
    let mut a = model(ModelKind::Multinomial, VocabularyKind::Interned);
    a.learn(&TermBag::from_pairs([("x", 1.0), ("y", 2.0)]), "billing", 1.0).unwrap();
    a.learn(&TermBag::from_pairs([("y", 1.0)]), "shipping", 1.0).unwrap();
    let view = a.clone();
    let fp = view.fingerprint();
    a.add_class("orders").unwrap();
    a.learn(&TermBag::from_pairs([("z", 1.0), ("x", 1.0)]), "orders", 1.0).unwrap();
    let order: Vec<String> = ["shipping", "orders", "returns", "billing", "access"].iter().map(|c| c.to_string()).collect();
    a.reorder_classes(&order).unwrap();
    let tc = a.term_counts();
    assert_eq!(tc["x"], vec![0.0, 1.0, 0.0, 1.0, 0.0]);
    assert_eq!(tc["y"], vec![1.0, 0.0, 0.0, 2.0, 0.0]);
    assert_eq!(tc["z"], vec![0.0, 1.0, 0.0, 0.0, 0.0]);
    assert_eq!(a.row_sharing(&view).shared_rows, 0, "a new column rewrites every row");
    assert_eq!(view.fingerprint(), fp);
    assert_eq!(view.classes(), CLASSES);
    assert_eq!(view.term_counts()["y"], vec![0.0, 2.0, 0.0, 1.0]);
    // The reordered model equals one that learned the same in that class order.
    let mut b = Model::new(NbParams::multinomial(0.5), Settings::defaults().analyzer, order, Vocabulary::new(VocabularyKind::Interned, 1_000_000, 0)).unwrap();
    b.learn(&TermBag::from_pairs([("x", 1.0), ("y", 2.0)]), "billing", 1.0).unwrap();
    b.learn(&TermBag::from_pairs([("y", 1.0)]), "shipping", 1.0).unwrap();
    b.learn(&TermBag::from_pairs([("z", 1.0), ("x", 1.0)]), "orders", 1.0).unwrap();
    assert_eq!(a.fingerprint(), b.fingerprint());
    assert_eq!(scores(&a, &probes()), scores(&b, &probes()));
}
