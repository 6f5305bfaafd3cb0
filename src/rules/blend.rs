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
use crate::model::score::log_sum_exp;
use crate::model::{Model, ScoreScratch, Scored};
use crate::settings::{BlendMode, Settings};
use crate::text::{Analyzer, AnalyzerScratch};

use super::matcher::MatchScratch;
use super::record::{FieldText, RecordTerms};
use super::ruleset::{Kind, Rule, RuleSet};

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
    /// Rule-set class index → model class index, for the rule set and model
    /// whose class lists `class_map_key` names.
    class_map: Vec<u32>,
    class_map_key: (u64, u64),
    /// The fired rules of the last record, resolved, in precedence order.
    pub fired: Vec<Fired>,
    /// Per boosted model class: the summed boost and its exponential.
    deltas: Vec<Delta>,
    /// The model's own score of the last record (before boosts), when the model
    /// scored it; `score.hits` then holds the rows it found (drift statistics).
    pub model_scored: Option<Scored>,
    /// Per model class: 1 + its index in `deltas` this record, or 0.
    delta_slot: Vec<u32>,
    /// (assign_boost, exp(assign_boost)) last used.
    assign_exp: (f64, f64),
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
        let DecideWork { rules: ms, score, class_map, class_map_key, fired: info, deltas, delta_slot, assign_exp, model_scored } = w;
        info.clear();
        *model_scored = None;
        // One pass over the fired rules, in precedence order: resolve each once
        // from the set's compact per-rule data (its boost, its class in the
        // model when a boost or takeover needs it, whether it is active) and
        // note the first active review rule, the first guard that assigns and
        // the first active assign rule.
        let mut review_rule: Option<&Rule> = None;
        let mut guard_assign: Option<&Rule> = None;
        let mut first_assign: Option<&Rule> = None;
        if let Some(set) = rules.filter(|r| !r.is_empty()) {
            if let Some(m) = usable {
                // The cache holds for one pair of class lists; another pair starts it afresh.
                let key = (set.classes_id, m.classes_id());
                if *class_map_key != key {
                    class_map.clear();
                    class_map.resize(set.classes().len(), NOT_CACHED);
                    *class_map_key = key;
                }
            }
            let takeover = self.blend == BlendMode::Takeover;
            // model_first turns non-guard assign rules into boosts of assign_boost.
            let (assign_boost, assign_factor) = if self.blend == BlendMode::ModelFirst {
                if assign_exp.0 != self.assign_boost {
                    *assign_exp = (self.assign_boost, self.assign_boost.exp());
                }
                *assign_exp
            } else {
                (0.0, 1.0)
            };
            for &i in set.matches(terms, fields, ms) {
                let h = set.meta(i);
                // Arithmetic rather than branches on the rule's kind: they are
                // data-dependent and would be mispredicted.
                let w = f64::from(u8::from(h.nonguard_assign));
                let amount = h.log_odds + w * assign_boost;
                let factor = h.factor * (1.0 + w * (assign_factor - 1.0));
                let class = usable.and_then(|m| model_class(class_map, m, h.class_idx, set.class_name(h.class_idx)));
                let active = h.guard
                    || !takeover
                    || class.map_or(0.0, |c| usable.expect("class implies model").doc_counts()[c]) < self.takeover_labels;
                info.push(Fired { rule: i, class, active, amount, factor });
                let assign = h.kind == Kind::Assign;
                if h.kind == Kind::Review && active && review_rule.is_none() {
                    review_rule = Some(set.rule(i));
                }
                if assign && h.guard && guard_assign.is_none() {
                    guard_assign = Some(set.rule(i));
                }
                if assign && active && first_assign.is_none() {
                    first_assign = Some(set.rule(i));
                }
            }
        }
        // `info` is empty unless `rules` is a set, so this never panics.
        let rule = |i: u32| -> &Rule { rules.expect("fired rules come from a set").rule(i) };
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
        let review_of = |d: Option<ReviewReason>| -> Option<ReviewReason> {
            match review_rule {
                Some(r) => Some(ReviewReason::Rule { id: r.id.clone() }),
                None => d,
            }
        };

        // 1. Guards that assign.
        if let Some(g) = guard_assign {
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
            if let Some(a) = first_assign {
                let mut d = rule_decision(a, 1.0);
                d.review = review_of(None);
                return d;
            }
        }
        // 3. The model, with boosts.
        if let (Some(m), true) = (usable, self.blend != BlendMode::RulesOnly) {
            let base = m.score(&terms.bag, score);
            *model_scored = Some(base);
            let mut scored = base;
            deltas.clear();
            if delta_slot.len() < m.classes().len() {
                delta_slot.resize(m.classes().len(), 0);
            }
            for f in info.iter().filter(|f| f.active && f.amount != 0.0) {
                if let Some(c) = f.class {
                    match delta_slot[c] {
                        0 => {
                            deltas.push(Delta { class: c, amount: f.amount, factor: f.factor });
                            delta_slot[c] = deltas.len() as u32;
                        }
                        k => {
                            let d = &mut deltas[k as usize - 1];
                            d.amount += f.amount;
                            d.factor *= f.factor;
                        }
                    }
                }
            }
            for d in deltas.iter() {
                delta_slot[d.class] = 0;
            }
            let mut decided_by = DecidedBy::Model;
            if !deltas.is_empty() {
                scored = rescore(&mut score.scores, deltas, base);
                if scored.best != base.best {
                    if let Some(i) = Self::credit(info, scored.best, base.best) {
                        decided_by = DecidedBy::Rule(rule(i).id.clone());
                    }
                }
            }
            let class = m.classes()[scored.best].clone();
            let review = review_of(self.policy.check(&class, scored.confidence, scored.margin));
            let top_terms = m.explain(&terms.bag, score, &scored, self.explain_terms);
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

    /// The rule that moved the winner: the largest boost to the new winner, else
    /// the largest penalty on the old one.
    fn credit(info: &[Fired], best: usize, old: usize) -> Option<u32> {
        let mut up: Option<(u32, f64)> = None;
        let mut down: Option<(u32, f64)> = None;
        for f in info.iter().filter(|f| f.active) {
            let x = f.amount;
            match f.class {
                Some(c) if c == best && x > 0.0 && up.is_none_or(|(_, y)| x > y) => up = Some((f.rule, x)),
                Some(c) if c == old && x < 0.0 && down.is_none_or(|(_, y)| x < y) => down = Some((f.rule, x)),
                _ => {}
            }
        }
        up.or(down).map(|(r, _)| r)
    }
}

/// A fired rule, resolved once per record.
#[derive(Debug, Clone, Copy)]
pub struct Fired {
    pub rule: u32,
    /// The rule's class in the model, if there is a usable model and it has the class.
    pub class: Option<usize>,
    /// False for a non-guard rule whose class the model has taken over.
    pub active: bool,
    /// The log-odds it adds to its class's score (0 if none), and exp of that.
    pub amount: f64,
    pub factor: f64,
}

const NOT_CACHED: u32 = u32::MAX;
const NOT_IN_MODEL: u32 = u32::MAX - 1;

/// The model's index of a rule's class, through a per-worker cache indexed by
/// the rule set's class index. The caller keys the cache by the identities of
/// both class lists (`RuleSet::classes_id`, `Model::classes_id`) and starts it
/// afresh when either changes, so a cached answer (found or absent) is never
/// stale and needs no name comparison; a miss searches the model's classes.
fn model_class(cache: &mut [u32], m: &Model, class_idx: u32, class: &str) -> Option<usize> {
    let slot = &mut cache[class_idx as usize];
    match *slot {
        NOT_CACHED => {
            let found = m.class_index(class);
            *slot = found.map_or(NOT_IN_MODEL, |x| x as u32);
            found
        }
        NOT_IN_MODEL => None,
        c => Some(c as usize),
    }
}

/// The boosts of one class: summed log-odds and their exponential.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Delta {
    pub class: usize,
    pub amount: f64,
    /// exp(amount), as the product of each boost's precomputed exponential.
    pub factor: f64,
}

/// Add the boosts to the scores, then winner, runner-up, posterior and margin.
///
/// The log-sum-exp is updated from the model's own instead of summed over every
/// class again: with M = ln Σ exp(sᵢ) before the boosts (recovered as
/// s_best − ln confidence), the sum after them is
/// exp(M) · (1 + Σ_c exp(s_c − M) · (exp(δ_c) − 1)) over the boosted classes c,
/// where exp(δ_c) is the delta's `factor`. A boosted class whose share of the
/// mass stays below e^−40 (4·10⁻¹⁸) before and after its boost changes that sum
/// by less than its own share, so its exponential is skipped. When boosts take
/// away most of the mass (the sum under 0.01), cancellation would cost
/// precision, and when they overflow it, the sum is not finite: in both cases
/// the full sum is taken instead.
///
/// Winner and runner-up: the model's were the top two of the unboosted scores
/// (highest score, lowest index on ties). Unless a boost touched one of them,
/// the new top two are among those two and the boosted classes, so only those
/// are compared; otherwise every class is scanned again.
fn rescore(scores: &mut [f64], deltas: &[Delta], base: Scored) -> Scored {
    const NEGLIGIBLE: f64 = -40.0;
    let m = scores[base.best] - base.confidence.ln();
    let mut rel = 1.0;
    let mut touched_top = false;
    for d in deltas {
        let s = scores[d.class];
        if s.is_finite() && s - m + d.amount.max(0.0) > NEGLIGIBLE {
            rel += (s - m).exp() * (d.factor - 1.0);
        }
        scores[d.class] = s + d.amount;
        touched_top |= d.class == base.best || Some(d.class) == base.runner_up;
    }
    let lse = if m.is_finite() && rel > 0.01 && rel.is_finite() { m + rel.ln() } else { log_sum_exp(scores) };
    let (best, runner_up) = if touched_top {
        top_two_one_pass(scores)
    } else {
        let ahead = |a: usize, b: usize| scores[a] > scores[b] || (scores[a] == scores[b] && a < b);
        let (mut best, mut second) = (base.best, base.runner_up);
        for d in deltas {
            let c = d.class;
            if ahead(c, best) {
                second = Some(best);
                best = c;
            } else if second.is_none_or(|s| ahead(c, s)) {
                second = Some(c);
            }
        }
        (best, second)
    };
    let confidence = if scores[best].is_finite() { (scores[best] - lse).exp().min(1.0) } else { 0.0 };
    let margin = match runner_up {
        Some(r) if scores[r].is_finite() => scores[best] - scores[r],
        _ => f64::INFINITY,
    };
    Scored { best, runner_up, confidence, margin, ..base }
}

/// `model::score::top_two` in one pass: the highest score and the runner-up,
/// the lowest index winning ties.
fn top_two_one_pass(xs: &[f64]) -> (usize, Option<usize>) {
    let mut best = 0;
    let mut second: Option<usize> = None;
    for (i, &x) in xs.iter().enumerate().skip(1) {
        if x > xs[best] {
            second = Some(best);
            best = i;
        } else if second.is_none_or(|s| x > xs[s]) {
            second = Some(i);
        }
    }
    (best, second)
}

fn round9(x: f64) -> f64 {
    (x * 1e9).round() / 1e9
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::folds::SplitMix64;
    use crate::model::score::top_two;

    fn base_of(scores: &[f64]) -> Scored {
        let (best, runner_up) = top_two(scores);
        let lse = log_sum_exp(scores);
        Scored {
            best,
            runner_up,
            confidence: (scores[best] - lse).exp(),
            margin: 0.0,
            known_weight: 0.0,
            total_weight: 0.0,
            known_terms: 0,
            total_terms: 0,
        }
    }

    /// Deltas as the blend builds them: amounts summed, factors multiplied.
    fn merge(boosts: &[(usize, f64)]) -> Vec<Delta> {
        let mut merged: Vec<Delta> = Vec::new();
        for &(c, d) in boosts {
            match merged.iter_mut().find(|x| x.class == c) {
                Some(x) => {
                    x.amount += d;
                    x.factor *= d.exp();
                }
                None => merged.push(Delta { class: c, amount: d, factor: d.exp() }),
            }
        }
        merged
    }

    fn boosted(scores: &[f64], deltas: &[Delta]) -> Vec<f64> {
        let mut full = scores.to_vec();
        for d in deltas {
            full[d.class] += d.amount;
        }
        full
    }

    #[test]
    fn incremental_rescore_equals_a_full_log_sum_exp() {
        let mut rng = SplitMix64::new(3);
        for trial in 0..2000 {
            let k = 2 + (trial % 80);
            let scores: Vec<f64> = (0..k).map(|_| -200.0 + 150.0 * rng.unit()).collect();
            let base = base_of(&scores);
            let n = 1 + trial % 4;
            let deltas: Vec<(usize, f64)> =
                (0..n).map(|i| ((rng.below(k as u64) as usize + i) % k, -20.0 + 40.0 * rng.unit())).collect();
            let merged = merge(&deltas);
            let full = boosted(&scores, &merged);
            let want = base_of(&full);
            let mut s = scores.clone();
            let got = rescore(&mut s, &merged, base);
            assert_eq!(s, full);
            assert_eq!((got.best, got.runner_up), (want.best, want.runner_up));
            assert!(
                (got.confidence - want.confidence).abs() < 1e-9,
                "trial {trial}: {} vs {}",
                got.confidence,
                want.confidence
            );
        }
    }

    #[test]
    fn rescore_picks_winner_and_runner_up_as_a_full_scan_does_with_ties() {
        // Small integer scores make ties common; the full scan's order (highest
        // score, lowest index) is the reference.
        let mut rng = SplitMix64::new(11);
        for trial in 0..3000 {
            let k = 1 + (trial % 12);
            let scores: Vec<f64> = (0..k).map(|_| -(rng.below(6) as f64)).collect();
            let base = base_of(&scores);
            let mut merged: Vec<(usize, f64)> = Vec::new();
            for _ in 0..1 + trial % 3 {
                let c = rng.below(k as u64) as usize;
                let d = rng.below(5) as f64 - 2.0;
                if d != 0.0 && !merged.iter().any(|x| x.0 == c) {
                    merged.push((c, d));
                }
            }
            let merged = merge(&merged);
            let full = boosted(&scores, &merged);
            let (best, runner_up) = top_two(&full);
            let mut s = scores.clone();
            let got = rescore(&mut s, &merged, base);
            assert_eq!((got.best, got.runner_up), (best, runner_up), "trial {trial}: {scores:?} + {merged:?}");
            let want_margin = runner_up.map_or(f64::INFINITY, |r| full[best] - full[r]);
            assert_eq!(got.margin, want_margin);
        }
    }

    #[test]
    fn rescore_falls_back_when_a_penalty_removes_almost_all_mass() {
        // The best class holds nearly all the mass and is pushed down by 50 log-odds.
        let scores = vec![0.0, -60.0, -61.0];
        let base = base_of(&scores);
        let mut s = scores.clone();
        let got = rescore(&mut s, &merge(&[(0, -50.0)]), base);
        let want = base_of(&s);
        assert_eq!(got.best, 0);
        assert!((got.confidence - want.confidence).abs() < 1e-12, "{} vs {}", got.confidence, want.confidence);
        let mut s = scores.clone();
        let got = rescore(&mut s, &merge(&[(0, -70.0)]), base);
        assert_eq!(got.best, 1);
        assert!((got.confidence - base_of(&s).confidence).abs() < 1e-12);
    }

    #[test]
    fn one_pass_top_two_equals_the_models() {
        let mut rng = SplitMix64::new(5);
        for trial in 0..5000 {
            let k = 1 + (trial % 9);
            let xs: Vec<f64> = (0..k)
                .map(|_| match rng.below(8) {
                    0 => f64::NEG_INFINITY,
                    v => -(v as f64),
                })
                .collect();
            assert_eq!(top_two_one_pass(&xs), top_two(&xs), "{xs:?}");
        }
    }

    #[test]
    fn rescore_falls_back_when_boosts_overflow_the_sum() {
        // Twenty boosts of 50 on one class: exp(1000) is not a finite f64.
        let scores = vec![0.0, -3.0, -5.0];
        let base = base_of(&scores);
        let merged = merge(&[(2, 50.0); 20]);
        assert!(merged[0].factor.is_infinite());
        let mut s = scores.clone();
        let got = rescore(&mut s, &merged, base);
        let want = base_of(&s);
        assert_eq!((got.best, got.runner_up), (2, Some(0)));
        assert!((got.confidence - want.confidence).abs() < 1e-12, "{} vs {}", got.confidence, want.confidence);
        assert!(got.confidence > 0.99);
    }
}
