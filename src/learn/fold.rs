//! `Folder`: applies complete label events to a model in log order, with exact corrections, and records the label-log offsets it has folded.
//!
//! Replays are idempotent per partition: an event below the recorded next
//! offset of its partition is skipped, so a replica that loads a snapshot and
//! re-reads from its offsets never learns an event twice.

use serde_json::{Map, Value};

use super::event::{LabelEvent, LabelReject};
use crate::io::record::{field_text, json_path};
use crate::model::snapshot::{LabelOffsets, SnapshotMeta};
use crate::model::Model;
use crate::settings::{FieldSetting, PriorKind};
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

/// What to do with a label for a class the model does not have.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnknownClassPolicy {
    /// Dead-letter it (the default).
    Reject,
    /// Add the class with zero counts, then learn.
    Add,
}

/// What the model said about a label's record just before learning it
/// (test-then-train): the prequential prediction behind feedback accuracy.
#[derive(Debug, Clone, PartialEq)]
pub struct Predicted {
    pub class: String,
    pub confidence: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub enum FoldOutcome {
    Learned {
        class: String,
        corrected_from: Option<String>,
        added_class: bool,
        /// With prequential scoring on, for a first label (not a correction) on a trained model.
        predicted: Option<Predicted>,
        /// When the record was scored, if the event says (resolved id-only labels do).
        scored_ms: Option<i64>,
    },
    Rejected(LabelReject),
    /// Below the partition's folded offset: already in the counts.
    AlreadyFolded,
}

pub struct Folder {
    model: Model,
    offsets: LabelOffsets,
    labels_learned: u64,
    policy: UnknownClassPolicy,
    analyzer: Analyzer,
    fields: Vec<FieldSetting>,
    scratch: AnalyzerScratch,
    bag: TermBag,
    prequential: bool,
    score: crate::model::ScoreScratch,
}

impl Folder {
    /// Start from a loaded model and the offsets its snapshot records.
    pub fn new(model: Model, meta: &SnapshotMeta, analyzer: Analyzer, fields: Vec<FieldSetting>, policy: UnknownClassPolicy) -> Folder {
        Folder {
            model,
            offsets: meta.label_offsets.clone(),
            labels_learned: meta.labels_learned,
            policy,
            analyzer,
            fields,
            scratch: AnalyzerScratch::default(),
            bag: TermBag::new(),
            prequential: false,
            score: Default::default(),
        }
    }

    /// Score each label's record before learning it, and report the prediction.
    pub fn set_prequential(&mut self, on: bool) {
        self.prequential = on;
    }

    pub fn model(&self) -> &Model {
        &self.model
    }

    pub fn offsets(&self) -> &LabelOffsets {
        &self.offsets
    }

    pub fn labels_learned(&self) -> u64 {
        self.labels_learned
    }

    /// The next offset to read for a partition, if any was folded.
    pub fn position(&self, topic: &str, partition: i32) -> Option<i64> {
        self.offsets.get(topic).and_then(|p| p.get(&partition)).copied()
    }

    /// Snapshot metadata describing exactly what has been folded.
    pub fn meta(&self, model_version: String) -> SnapshotMeta {
        SnapshotMeta {
            label_offsets: self.offsets.clone(),
            created_at: crate::clock::rfc3339_now(),
            model_version,
            labels_learned: self.labels_learned,
            base: String::new(),
            base_labels: 0,
        }
    }

    /// Fold the event at `offset` of a label-log partition. The offset is
    /// recorded whatever the outcome, so a refused event is not retried.
    pub fn apply(&mut self, topic: &str, partition: i32, offset: i64, payload: &[u8]) -> FoldOutcome {
        if let Some(next) = self.position(topic, partition) {
            if offset < next {
                return FoldOutcome::AlreadyFolded;
            }
        }
        let out = match LabelEvent::parse(payload) {
            Ok(e) => self.apply_event(&e),
            Err(r) => FoldOutcome::Rejected(r),
        };
        self.offsets.entry(topic.to_string()).or_default().insert(partition, offset + 1);
        out
    }

    /// Apply one complete event; refused events change nothing.
    pub fn apply_event(&mut self, e: &LabelEvent) -> FoldOutcome {
        match self.try_apply(e) {
            Ok(out) => {
                self.labels_learned += 1;
                out
            }
            Err(r) => FoldOutcome::Rejected(r),
        }
    }

    fn try_apply(&mut self, e: &LabelEvent) -> Result<FoldOutcome, LabelReject> {
        let known = self.model.class_index(&e.class).is_some();
        if !known {
            let addable = self.policy == UnknownClassPolicy::Add
                && (self.model.params().priors != PriorKind::Given || self.model.params().given_priors.contains_key(&e.class));
            if !addable {
                return Err(LabelReject::UnknownClass(e.class.clone()));
            }
        }
        if let Some(old) = &e.replaces {
            if self.model.class_index(old).is_none() {
                return Err(LabelReject::NotLearned(old.clone()));
            }
        }
        self.build_bag(e)?;
        let predicted = (self.prequential && e.replaces.is_none() && !self.model.is_empty()).then(|| {
            let sc = self.model.score(&self.bag, &mut self.score);
            Predicted { class: self.model.classes()[sc.best].clone(), confidence: sc.confidence }
        });
        if let Some(old) = &e.replaces {
            self.model.unlearn(&self.bag, old, e.weight).map_err(|_| LabelReject::NotLearned(old.clone()))?;
        }
        if !known {
            // Classes stay sorted, so replicas that see new classes in different
            // interleavings of the log's partitions end with the same class order.
            self.model.add_class(&e.class).expect("checked addable");
            let mut order = self.model.classes().to_vec();
            order.sort();
            self.model.reorder_classes(&order).expect("a permutation of the classes");
        }
        self.model.learn(&self.bag, &e.class, e.weight).map_err(|err| LabelReject::Malformed(err.to_string()))?;
        Ok(FoldOutcome::Learned {
            class: e.class.clone(),
            corrected_from: e.replaces.clone(),
            added_class: !known,
            predicted,
            scored_ms: e.scored_ms,
        })
    }

    fn build_bag(&mut self, e: &LabelEvent) -> Result<(), LabelReject> {
        self.bag.clear();
        if let Some(f) = &e.features {
            for (t, w) in &f.0 {
                self.bag.push(t, *w);
            }
            return Ok(());
        }
        let fields = e.fields.as_ref().expect("parse checked fields or features");
        let texts = field_texts(fields, &self.fields);
        if texts.is_empty() {
            return Err(LabelReject::MissingField("fields (none of the configured text fields)"));
        }
        self.analyzer.analyze_fields(texts.iter().map(|(t, w)| (t.as_str(), *w)), &mut self.scratch, &mut self.bag);
        Ok(())
    }

    pub fn into_model(self) -> Model {
        self.model
    }
}

/// The configured text fields present in a record object, with their weights.
pub fn field_texts(obj: &Map<String, Value>, fields: &[FieldSetting]) -> Vec<(String, f64)> {
    let v = Value::Object(obj.clone());
    fields
        .iter()
        .filter_map(|f| json_path(&v, &f.name).and_then(field_text).map(|t| (t.into_owned(), f.weight)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::Vocabulary;
    use crate::model::NbParams;
    use crate::settings::Settings;

    fn folder(policy: UnknownClassPolicy) -> Folder {
        let s = Settings::defaults();
        let m = Model::new(
            NbParams::multinomial(1.0),
            s.analyzer.clone(),
            vec!["billing".into(), "returns".into()],
            Vocabulary::new(s.model.vocabulary, 10_000, 0),
        )
        .unwrap();
        let meta = SnapshotMeta { model_version: "t".into(), ..SnapshotMeta::default() };
        Folder::new(m, &meta, Analyzer::new(&s.analyzer).unwrap(), s.input.fields.clone(), policy)
    }

    const A: &[u8] = br#"{"id":"r1","class":"returns","fields":{"subject":"Refund","body":"refund the boots, order 4711"}}"#;
    const A_TO_BILLING: &[u8] = br#"{"id":"r1","class":"billing","replaces":"returns","fields":{"subject":"Refund","body":"refund the boots, order 4711"}}"#;
    const B: &[u8] = br#"{"id":"r1","class":"billing","fields":{"subject":"Refund","body":"refund the boots, order 4711"}}"#;

    #[test]
    fn correction_equals_learning_the_right_class_alone() {
        let mut f = folder(UnknownClassPolicy::Reject);
        assert!(matches!(f.apply("labels", 0, 0, A), FoldOutcome::Learned { .. }));
        assert!(matches!(f.apply("labels", 0, 1, A_TO_BILLING), FoldOutcome::Learned { corrected_from: Some(_), .. }));
        let mut g = folder(UnknownClassPolicy::Reject);
        g.apply("labels", 0, 0, B);
        assert_eq!(f.model().fingerprint(), g.model().fingerprint());
        assert_eq!(f.model().term_counts(), g.model().term_counts());
        assert_eq!(f.labels_learned(), 2);
    }

    #[test]
    fn replay_below_the_folded_offset_is_skipped() {
        let mut f = folder(UnknownClassPolicy::Reject);
        f.apply("labels", 2, 10, A);
        let fp = f.model().fingerprint();
        assert_eq!(f.apply("labels", 2, 10, A), FoldOutcome::AlreadyFolded);
        assert_eq!(f.apply("labels", 2, 3, A), FoldOutcome::AlreadyFolded);
        assert_eq!(f.model().fingerprint(), fp);
        assert_eq!(f.position("labels", 2), Some(11));
        assert!(matches!(f.apply("labels", 1, 0, A), FoldOutcome::Learned { .. }), "other partitions are separate");
    }

    #[test]
    fn unknown_classes_are_rejected_or_added_by_policy() {
        let ev = br#"{"id":"x","class":"warranty","fields":{"body":"seam split after a week"}}"#;
        let mut f = folder(UnknownClassPolicy::Reject);
        assert_eq!(f.apply("l", 0, 0, ev), FoldOutcome::Rejected(LabelReject::UnknownClass("warranty".into())));
        assert_eq!(f.model().classes().len(), 2);
        assert_eq!(f.position("l", 0), Some(1), "a refused event still advances the offset");
        let mut g = folder(UnknownClassPolicy::Add);
        assert!(matches!(g.apply("l", 0, 0, ev), FoldOutcome::Learned { added_class: true, .. }));
        assert_eq!(g.model().classes().len(), 3);
    }

    #[test]
    fn new_classes_end_in_the_same_order_whatever_the_interleaving() {
        let w = br#"{"id":"w","class":"warranty","fields":{"body":"seam split after a week"}}"#;
        let a = br#"{"id":"a","class":"apparel","fields":{"body":"jacket sizes run small"}}"#;
        // Two partitions of one log, read in two interleavings by two replicas.
        let mut f = folder(UnknownClassPolicy::Add);
        f.apply("l", 0, 0, w);
        f.apply("l", 1, 0, a);
        let mut g = folder(UnknownClassPolicy::Add);
        g.apply("l", 1, 0, a);
        g.apply("l", 0, 0, w);
        assert_eq!(f.model().classes(), ["apparel", "billing", "returns", "warranty"]);
        assert_eq!(f.model().classes(), g.model().classes());
        assert_eq!(f.model().fingerprint(), g.model().fingerprint());
    }

    #[test]
    fn prequential_prediction_is_made_before_learning_and_not_for_corrections() {
        let mut f = folder(UnknownClassPolicy::Reject);
        f.set_prequential(true);
        match f.apply("l", 0, 0, A) {
            FoldOutcome::Learned { predicted, .. } => assert_eq!(predicted, None, "an empty model predicts nothing"),
            o => panic!("{o:?}"),
        }
        let b2 = br#"{"id":"r2","class":"billing","fields":{"body":"card charged twice for the order"},"scored_ms":5}"#;
        f.apply("l", 0, 1, b2);
        let again = br#"{"id":"r3","class":"billing","fields":{"body":"refund the boots"}}"#;
        match f.apply("l", 0, 2, again) {
            FoldOutcome::Learned { predicted: Some(p), .. } => {
                assert_eq!(p.class, "returns", "scored before learning: only returns knows these terms");
                assert!(p.confidence > 0.5);
            }
            o => panic!("{o:?}"),
        }
        match f.apply("l", 0, 3, A_TO_BILLING) {
            FoldOutcome::Learned { predicted, corrected_from, .. } => {
                assert_eq!(predicted, None);
                assert_eq!(corrected_from.as_deref(), Some("returns"));
            }
            o => panic!("{o:?}"),
        }
        match f.apply("l", 0, 4, br#"{"id":"r4","class":"billing","fields":{"body":"card"},"scored_ms":1234}"#) {
            FoldOutcome::Learned { scored_ms, .. } => assert_eq!(scored_ms, Some(1234)),
            o => panic!("{o:?}"),
        }
    }

    #[test]
    fn refused_events_change_nothing() {
        let mut f = folder(UnknownClassPolicy::Reject);
        f.apply("l", 0, 0, A);
        let fp = f.model().fingerprint();
        // Correction of something never learned as billing.
        let bad = br#"{"id":"r1","class":"returns","replaces":"billing","fields":{"body":"refund the boots"}}"#;
        assert_eq!(f.apply("l", 0, 1, bad), FoldOutcome::Rejected(LabelReject::NotLearned("billing".into())));
        assert!(matches!(f.apply("l", 0, 2, b"{oops"), FoldOutcome::Rejected(LabelReject::Malformed(_))));
        assert!(matches!(f.apply("l", 0, 3, br#"{"id":"z","class":"returns","fields":{"other":"x"}}"#), FoldOutcome::Rejected(LabelReject::MissingField(_))));
        assert_eq!(f.model().fingerprint(), fp);
        assert_eq!(f.labels_learned(), 1);
    }

    #[test]
    fn features_and_fields_forms_learn_the_same_counts() {
        let s = Settings::defaults();
        let a = Analyzer::new(&s.analyzer).unwrap();
        let mut bag = TermBag::new();
        a.analyze_fields([("Refund", 2.0), ("refund the boots, order 4711", 1.0)], &mut AnalyzerScratch::default(), &mut bag);
        let feats = serde_json::to_string(&crate::text::bag::FeatureList::from(&bag)).unwrap();
        let ev = format!(r#"{{"id":"r1","class":"returns","features":{feats}}}"#);
        let mut f = folder(UnknownClassPolicy::Reject);
        f.apply("l", 0, 0, ev.as_bytes());
        let mut g = folder(UnknownClassPolicy::Reject);
        g.apply("l", 0, 0, A);
        assert_eq!(f.model().fingerprint(), g.model().fingerprint());
    }
}
