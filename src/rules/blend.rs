//! The decision seam: fired rules and the model's scores become one `Decision`, under the blend mode from settings. Guards win in every mode.
//!
//! Order of precedence (docs/rules.md has the table):
//! 1. a fired guard that assigns decides the class, in every mode;
//! 2. in `rules_only`, `rules_first` and `takeover` (and `model_first` without
//!    a usable model) the first fired assign rule decides;
//! 3. otherwise the model decides (not in `rules_only`), after boosts are added
//!    to its log scores: `boost` rules by their `log_odds`, and in
//!    `model_first` assign rules by `rules.assign_boost`;
//! 4. otherwise a fired review rule suggests its class; otherwise nobody decides.
//!
//! A fired review rule (a guard in every mode, others when active) sends the
//! decision to review whatever decided the class. In `takeover`, a non-guard
//! rule is active only while the model has fewer than `takeover_labels` labels
//! for the rule's class. `decided_by` names the rule that decided, or the
//! model; when boosts change the model's winner, it names the boost rule.

use crate::decide::{DecidedBy, Decision, ReviewPolicy, ReviewReason};
use crate::model::score::{log_sum_exp, top_two};
use crate::model::{Model, ScoreScratch, Scored};
use crate::settings::{BlendMode, Settings};
use crate::text::{Analyzer, AnalyzerScratch};

use super::matcher::MatchScratch;
use super::record::{FieldText, RecordTerms};
use super::ruleset::{Action, Rule, RuleSet};

/// How decisions are made: the blend mode and the review policy, from settings.
/// It holds no rules and no model; the caller passes the current view of each,
/// so a service can swap either between records.
#[derive(Debug, Clone, PartialEq)]
pub struct Decider {
    pub blend: BlendMode,
    pub takeover_labels: f64,
    pub assign_boost: f64,
    pub policy: ReviewPolicy,
    pub explain_terms: usize,
}

/// Per-worker buffers, reused across records.
#[derive(Debug, Default)]
pub struct BlendScratch {
    pub terms: RecordTerms,
    pub analyzer: AnalyzerScratch,
    pub work: DecideWork,
}

/// The buffers `decide_analyzed` needs besides the record's terms.
#[derive(Debug, Default)]
pub struct DecideWork {
    pub rules: MatchScratch,
    /// After a model decision: the per-class log scores with boosts added.
    pub score: ScoreScratch,
}

impl Decider {
    pub fn from_settings(s: &Settings) -> Decider {
        Decider {
            blend: s.rules.blend,
            takeover_labels: s.rules.takeover_labels as f64,
            assign_boost: s.rules.assign_boost,
            policy: ReviewPolicy::from_settings(&s.review),
            explain_terms: s.model.explain_terms,
        }
    }

    /// Analyze the fields, then decide. The analyzed terms stay in `s.terms`
    /// (the model's bag is `s.terms.bag`).
    #[allow(clippy::too_many_arguments)]
    pub fn decide(
        &self,
        analyzer: &Analyzer,
        rules: Option<&RuleSet>,
        model: Option<&Model>,
        model_version: &str,
        id: Option<String>,
        fields: &[FieldText<'_>],
        s: &mut BlendScratch,
    ) -> Decision {
        let BlendScratch { terms, analyzer: asc, work } = s;
        terms.analyze(analyzer, fields, asc);
        self.decide_analyzed(rules, model, model_version, id, fields, terms, work)
    }

    /// Decide a record whose terms are analyzed already.
    #[allow(clippy::too_many_arguments)]
    pub fn decide_analyzed(
        &self,
        rules: Option<&RuleSet>,
        model: Option<&Model>,
        model_version: &str,
        id: Option<String>,
        fields: &[FieldText<'_>],
        terms: &RecordTerms,
        w: &mut DecideWork,
    ) -> Decision {
        let usable = model.filter(|m| !m.is_empty());
        let fired: &[u32] = match rules {
            Some(r) if !r.is_empty() => r.matches(terms, fields, &mut w.rules),
            _ => &[],
        };
        // `fired` is empty unless `rules` is a set, so this never panics.
        let rule = |i: u32| -> &Rule { rules.expect("fired rules come from a set").rule(i) };
        let active = |r: &Rule| -> bool {
            r.guard || self.blend != BlendMode::Takeover || labels_for(usable, &r.class) < self.takeover_labels
        };
        let rule_decision = |r: &Rule, confidence: f64| Decision {
            id: id.clone(),
            class: r.class.clone(),
            confidence,
            margin: None,
            decided_by: DecidedBy::Rule(r.id.clone()),
            review: None,
            model_version: model_version.to_string(),
            top_terms: Vec::new(),
        };
        let review_rule = fired.iter().map(|&i| rule(i)).find(|r| r.action == Action::Review && active(r));
        let review_of = |d: Option<ReviewReason>| -> Option<ReviewReason> {
            match review_rule {
                Some(r) => Some(ReviewReason::Rule { id: r.id.clone() }),
                None => d,
            }
        };

        // 1. Guards that assign.
        if let Some(g) = fired.iter().map(|&i| rule(i)).find(|r| r.guard && r.action == Action::Assign) {
            let mut d = rule_decision(g, 1.0);
            d.review = review_of(None);
            return d;
        }
        // 2. Assign rules, where rules decide first.
        let rules_decide = match self.blend {
            BlendMode::RulesOnly | BlendMode::RulesFirst | BlendMode::Takeover => true,
            BlendMode::ModelFirst => usable.is_none(),
        };
        if rules_decide {
            if let Some(a) = fired.iter().map(|&i| rule(i)).find(|r| r.action == Action::Assign && active(r)) {
                let mut d = rule_decision(a, 1.0);
                d.review = review_of(None);
                return d;
            }
        }
        // 3. The model, with boosts.
        if let (Some(m), true) = (usable, self.blend != BlendMode::RulesOnly) {
            let base = m.score(&terms.bag, &mut w.score);
            let mut scored = base;
            let mut boosted = false;
            for &i in fired {
                let r = rule(i);
                if !active(r) {
                    continue;
                }
                let amount = self.boost_of(r);
                if amount == 0.0 {
                    continue;
                }
                if let Some(c) = m.class_index(&r.class) {
                    w.score.scores[c] += amount;
                    boosted = true;
                }
            }
            let mut decided_by = DecidedBy::Model;
            if boosted {
                scored = rescore(&w.score.scores, base);
                if scored.best != base.best {
                    if let Some(r) =
                        self.credit(fired, rules.expect("boosts come from a set"), m, scored.best, base.best, &active)
                    {
                        decided_by = DecidedBy::Rule(r.id.clone());
                    }
                }
            }
            let class = m.classes()[scored.best].clone();
            let review = review_of(self.policy.check(&class, scored.confidence, scored.margin));
            let top_terms = m.explain(&terms.bag, &w.score, &scored, self.explain_terms);
            return Decision {
                id,
                class,
                confidence: round9(scored.confidence),
                margin: scored.margin.is_finite().then(|| round9(scored.margin)),
                decided_by,
                review,
                model_version: model_version.to_string(),
                top_terms,
            };
        }
        // 4. A review rule's suggestion, or nobody.
        if let Some(r) = review_rule {
            let mut d = rule_decision(r, 0.0);
            d.review = review_of(None);
            return d;
        }
        let reason = if self.blend == BlendMode::RulesOnly { ReviewReason::Unmatched } else { ReviewReason::NoModel };
        Decision {
            id,
            class: String::new(),
            confidence: 0.0,
            margin: None,
            decided_by: DecidedBy::Nobody,
            review: Some(reason),
            model_version: model_version.to_string(),
            top_terms: Vec::new(),
        }
    }

    /// The log-odds a fired, active rule adds to the model's score of its class.
    fn boost_of(&self, r: &Rule) -> f64 {
        match (r.action, self.blend) {
            (Action::Boost(x), _) => x,
            (Action::Assign, BlendMode::ModelFirst) if !r.guard => self.assign_boost,
            _ => 0.0,
        }
    }

    /// The rule that moved the winner: the largest boost to the new winner, else
    /// the largest penalty on the old one.
    fn credit<'r>(
        &self,
        fired: &[u32],
        set: &'r RuleSet,
        m: &Model,
        best: usize,
        old: usize,
        active: &dyn Fn(&Rule) -> bool,
    ) -> Option<&'r Rule> {
        let mut up: Option<(&Rule, f64)> = None;
        let mut down: Option<(&Rule, f64)> = None;
        for &i in fired {
            let r = set.rule(i);
            if !active(r) {
                continue;
            }
            let x = self.boost_of(r);
            match m.class_index(&r.class) {
                Some(c) if c == best && x > 0.0 && up.is_none_or(|(_, y)| x > y) => up = Some((r, x)),
                Some(c) if c == old && x < 0.0 && down.is_none_or(|(_, y)| x < y) => down = Some((r, x)),
                _ => {}
            }
        }
        up.or(down).map(|(r, _)| r)
    }
}

fn labels_for(model: Option<&Model>, class: &str) -> f64 {
    model.and_then(|m| m.class_index(class).map(|c| m.doc_counts()[c])).unwrap_or(0.0)
}

/// Winner, runner-up, posterior and margin of adjusted log scores.
fn rescore(scores: &[f64], base: Scored) -> Scored {
    let (best, runner_up) = top_two(scores);
    let lse = log_sum_exp(scores);
    let confidence = if scores[best].is_finite() { (scores[best] - lse).exp() } else { 0.0 };
    let margin = match runner_up {
        Some(r) if scores[r].is_finite() => scores[best] - scores[r],
        _ => f64::INFINITY,
    };
    Scored { best, runner_up, confidence, margin, ..base }
}

fn round9(x: f64) -> f64 {
    (x * 1e9).round() / 1e9
}
