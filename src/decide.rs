//! Decisions: a scored record becomes a `Decision` (class, confidence, margin, who decided, top terms) and the review policy marks the uncertain ones.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::model::explain::TermContribution;
use crate::model::{Model, ScoreScratch, Scored};
use crate::settings::ReviewSettings;
use crate::text::TermBag;

/// Who made a decision.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "id")]
pub enum DecidedBy {
    /// The Naive Bayes model.
    Model,
    /// A hand-written rule, by id.
    Rule(String),
    /// Nothing could decide (no trained model and no rule fired).
    Nobody,
}

impl DecidedBy {
    /// The flat string form used in JSON output and headers: `model`, `rule:<id>`, `none`.
    pub fn label(&self) -> String {
        match self {
            DecidedBy::Model => "model".into(),
            DecidedBy::Rule(id) => format!("rule:{id}"),
            DecidedBy::Nobody => "none".into(),
        }
    }
}

/// Why a decision goes to review.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ReviewReason {
    LowConfidence { confidence: f64, threshold: f64 },
    LowMargin { margin: f64, floor: f64 },
    Rule { id: String },
    NoModel,
    /// `rules_only`: no rule assigned a class.
    Unmatched,
}

impl ReviewReason {
    /// Short stable label for metrics and headers.
    pub fn label(&self) -> &'static str {
        match self {
            ReviewReason::LowConfidence { .. } => "low_confidence",
            ReviewReason::LowMargin { .. } => "low_margin",
            ReviewReason::Rule { .. } => "rule",
            ReviewReason::NoModel => "no_model",
            ReviewReason::Unmatched => "unmatched",
        }
    }
}

/// The outcome for one record.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Decision {
    pub id: Option<String>,
    pub class: String,
    pub confidence: f64,
    /// Joint log-likelihood gap to the runner-up; `None` when there is none.
    pub margin: Option<f64>,
    #[serde(serialize_with = "ser_decided_by")]
    pub decided_by: DecidedBy,
    pub review: Option<ReviewReason>,
    pub model_version: String,
    pub top_terms: Vec<TermContribution>,
}

fn ser_decided_by<S: serde::Serializer>(d: &DecidedBy, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&d.label())
}

/// The review rule, checked from settings.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewPolicy {
    pub min_confidence: f64,
    pub min_margin: f64,
    pub class_min_confidence: BTreeMap<String, f64>,
}

impl ReviewPolicy {
    pub fn from_settings(r: &ReviewSettings) -> ReviewPolicy {
        ReviewPolicy {
            min_confidence: r.min_confidence,
            min_margin: r.min_margin,
            class_min_confidence: r.class_min_confidence.clone(),
        }
    }

    /// Never sends anything to review.
    pub fn none() -> ReviewPolicy {
        ReviewPolicy { min_confidence: 0.0, min_margin: 0.0, class_min_confidence: BTreeMap::new() }
    }

    /// The reason a model decision needs a person, if it does.
    pub fn check(&self, class: &str, confidence: f64, margin: f64) -> Option<ReviewReason> {
        let threshold = self.class_min_confidence.get(class).copied().unwrap_or(self.min_confidence);
        if confidence < threshold {
            return Some(ReviewReason::LowConfidence { confidence, threshold });
        }
        if margin < self.min_margin {
            return Some(ReviewReason::LowMargin { margin, floor: self.min_margin });
        }
        None
    }
}

/// The blended entry point (rules + model under the blend mode), beside
/// `decide_by_model`; it lives with the rules in `src/rules/blend.rs`.
pub use crate::rules::blend::{BlendScratch, Decider, DecideWork};

/// Everything a scorer needs per worker, reused across records.
#[derive(Debug, Default)]
pub struct DecideScratch {
    pub score: ScoreScratch,
}

/// Score `bag` with the model and apply the review policy.
pub fn decide_by_model(
    model: &Model,
    model_version: &str,
    id: Option<String>,
    bag: &TermBag,
    policy: &ReviewPolicy,
    explain_terms: usize,
    scratch: &mut DecideScratch,
) -> (Decision, Scored) {
    let scored = model.score(bag, &mut scratch.score);
    let class = model.classes()[scored.best].clone();
    if model.is_empty() {
        let d = Decision {
            id,
            class,
            confidence: scored.confidence,
            margin: None,
            decided_by: DecidedBy::Nobody,
            review: Some(ReviewReason::NoModel),
            model_version: model_version.to_string(),
            top_terms: Vec::new(),
        };
        return (d, scored);
    }
    let review = policy.check(&class, scored.confidence, scored.margin);
    let top_terms = model.explain(bag, &scratch.score, &scored, explain_terms);
    let d = Decision {
        id,
        class,
        confidence: round9(scored.confidence),
        margin: scored.margin.is_finite().then(|| round9(scored.margin)),
        decided_by: DecidedBy::Model,
        review,
        model_version: model_version.to_string(),
        top_terms,
    };
    (d, scored)
}

fn round9(x: f64) -> f64 {
    (x * 1e9).round() / 1e9
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn review_policy_thresholds() {
        let mut p = ReviewPolicy { min_confidence: 0.6, min_margin: 0.5, class_min_confidence: BTreeMap::new() };
        p.class_min_confidence.insert("defects".into(), 0.95);
        assert_eq!(p.check("billing", 0.7, 1.0), None);
        assert!(matches!(p.check("billing", 0.5, 1.0), Some(ReviewReason::LowConfidence { .. })));
        assert!(matches!(p.check("billing", 0.7, 0.2), Some(ReviewReason::LowMargin { .. })));
        assert!(matches!(p.check("defects", 0.9, 5.0), Some(ReviewReason::LowConfidence { threshold, .. }) if threshold == 0.95));
        assert_eq!(ReviewPolicy::none().check("x", 0.0, 0.0), None);
    }

    #[test]
    fn decided_by_labels() {
        assert_eq!(DecidedBy::Model.label(), "model");
        assert_eq!(DecidedBy::Rule("returns-1".into()).label(), "rule:returns-1");
        assert_eq!(DecidedBy::Nobody.label(), "none");
    }
}
