//! Blending rules with the model: each blend mode, guards winning in every mode, boosts as log-odds before the posterior, takeover after N labels, and `decided_by`.

use sieveline::decide::{DecidedBy, Decider, Decision, ReviewPolicy, ReviewReason};
use sieveline::features::Vocabulary;
use sieveline::model::score::log_sum_exp;
use sieveline::model::{Model, NbParams, ScoreScratch};
use sieveline::rules::{self, BlendScratch, FieldText, RuleSet};
use sieveline::settings::{BlendMode, Settings, VocabularyKind};
use sieveline::text::{Analyzer, TermBag};

const RULES: &str = r#"
[[rule]]
id = "refund"
class = "billing"
action = "assign"
  [[rule.when]]
  any = ["refund"]

[[rule]]
id = "parcel-hint"
class = "shipping"
action = "boost"
log_odds = 4.0
  [[rule.when]]
  any = ["parcel"]

[[rule]]
id = "fraud"
class = "billing"
action = "review"
guard = true
  [[rule.when]]
  any = ["fraud"]

[[rule]]
id = "chargeback"
class = "billing"
action = "assign"
guard = true
  [[rule.when]]
  any = ["chargeback"]

[[rule]]
id = "courier"
class = "shipping"
action = "assign"
  [[rule.when]]
  any = ["courier"]
"#;

struct Fixture {
    analyzer: Analyzer,
    rules: RuleSet,
}

fn fixture() -> Fixture {
    let analyzer = Analyzer::new(&Settings::defaults().analyzer).unwrap();
    let rules = rules::from_str(RULES, "blend.toml", &analyzer, &["body".to_string()]).unwrap();
    Fixture { analyzer, rules }
}

/// `n` labels per class: billing talks about cards and invoices, shipping about parcels and couriers.
fn model(n: usize) -> Model {
    let mut m = Model::new(
        NbParams::multinomial(1.0),
        Settings::defaults().analyzer,
        vec!["billing".into(), "shipping".into()],
        Vocabulary::new(VocabularyKind::Interned, 1000, 0),
    )
    .unwrap();
    for _ in 0..n {
        m.learn(&TermBag::from_pairs([("card", 1.0), ("invoice", 1.0), ("charged", 1.0)]), "billing", 1.0).unwrap();
        m.learn(
            &TermBag::from_pairs([("parcel", 1.0), ("courier", 1.0), ("late", 1.0), ("card", 1.0)]),
            "shipping",
            1.0,
        )
        .unwrap();
    }
    m
}

fn decider(blend: BlendMode) -> Decider {
    Decider { blend, takeover_labels: 10.0, assign_boost: 3.0, policy: ReviewPolicy::none(), explain_terms: 3 }
}

fn decide(d: &Decider, f: &Fixture, m: Option<&Model>, text: &str) -> Decision {
    let fields = [FieldText { field: 0, text, weight: 1.0 }];
    d.decide(&f.analyzer, Some(&f.rules), m, "v1", Some("r1".into()), &fields, &mut BlendScratch::default())
}

fn rule(id: &str) -> DecidedBy {
    DecidedBy::Rule(id.into())
}

#[test]
fn rules_only_decides_by_assign_rules_and_nothing_else() {
    let f = fixture();
    let d = decider(BlendMode::RulesOnly);
    let m = model(5);
    let x = decide(&d, &f, Some(&m), "I want a refund for my invoice");
    assert_eq!((x.class.as_str(), &x.decided_by, x.confidence), ("billing", &rule("refund"), 1.0));
    // A boost alone decides nothing here, and the model is not consulted.
    let x = decide(&d, &f, Some(&m), "my parcel and invoice");
    assert_eq!(x.decided_by, DecidedBy::Nobody);
    assert_eq!(x.review, Some(ReviewReason::Unmatched));
}

#[test]
fn rules_first_lets_the_model_fill_in() {
    let f = fixture();
    let d = decider(BlendMode::RulesFirst);
    let m = model(5);
    // "courier" is a shipping word for the model too, but "refund" fires first here only if present:
    let x = decide(&d, &f, Some(&m), "card invoice charged refund");
    assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &rule("refund")));
    let x = decide(&d, &f, Some(&m), "the invoice was charged twice");
    assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &DecidedBy::Model));
    assert!(!x.top_terms.is_empty());
    // An assign rule beats a model that is sure of the other class.
    let x = decide(&d, &f, Some(&m), "card invoice charged invoice charged courier");
    assert_eq!((x.class.as_str(), &x.decided_by), ("shipping", &rule("courier")));
    // Without a model, what no rule decides is undecided.
    let x = decide(&d, &f, None, "the invoice was charged twice");
    assert_eq!((&x.decided_by, &x.review), (&DecidedBy::Nobody, &Some(ReviewReason::NoModel)));
}

#[test]
fn a_boost_adds_log_odds_before_the_posterior_and_is_credited_when_it_flips_the_winner() {
    let f = fixture();
    let d = decider(BlendMode::RulesFirst);
    let m = model(5);
    let text = "invoice charged parcel";
    let mut bag = TermBag::new();
    f.analyzer.analyze_fields([(text, 1.0)], &mut Default::default(), &mut bag);
    let mut s = ScoreScratch::default();
    let base = m.score(&bag, &mut s);
    assert_eq!(m.classes()[base.best], "billing", "without the boost the model says billing");
    let mut boosted = s.scores.clone();
    boosted[1] += 4.0;
    let expect = (boosted[1] - log_sum_exp(&boosted)).exp();
    let x = decide(&d, &f, Some(&m), text);
    assert_eq!((x.class.as_str(), &x.decided_by), ("shipping", &rule("parcel-hint")));
    assert!((x.confidence - expect).abs() < 1e-8, "{} vs {expect}", x.confidence);
    assert!((x.margin.unwrap() - (boosted[1] - boosted[0])).abs() < 1e-8);
    // A boost that agrees with the model leaves the model credited.
    let x = decide(&d, &f, Some(&m), "late parcel");
    assert_eq!((x.class.as_str(), &x.decided_by), ("shipping", &DecidedBy::Model));
}

#[test]
fn model_first_turns_assign_rules_into_boosts() {
    let f = fixture();
    let d = decider(BlendMode::ModelFirst);
    let m = model(20);
    // Weak model evidence for shipping (one "late"): the assign rule's 3 log-odds carry billing.
    let fields = [FieldText { field: 0, text: "card late refund", weight: 1.0 }];
    let alone = d.decide(&f.analyzer, None, Some(&m), "v1", None, &fields, &mut BlendScratch::default());
    assert_eq!(alone.class, "shipping", "the model alone leans to shipping");
    assert!(alone.margin.unwrap() < 3.0);
    let x = decide(&d, &f, Some(&m), "card late refund");
    assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &rule("refund")));
    // Strong model evidence for shipping outweighs the rule's 3 log-odds.
    let x = decide(&d, &f, Some(&m), "refund parcel parcel courier courier late late");
    assert_eq!((x.class.as_str(), &x.decided_by), ("shipping", &DecidedBy::Model));
    // Without a usable model, rules decide as in rules_first.
    let x = decide(&d, &f, Some(&model(0)), "refund please");
    assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &rule("refund")));
}

#[test]
fn takeover_hands_a_class_to_the_model_at_n_labels() {
    let f = fixture();
    let d = decider(BlendMode::Takeover); // takeover_labels = 10
    let text = "refund parcel parcel courier courier late late";
    let below = model(9);
    let x = decide(&d, &f, Some(&below), text);
    assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &rule("refund")), "9 labels: the rule still decides");
    let at = model(10);
    let x = decide(&d, &f, Some(&at), text);
    assert_eq!(
        (x.class.as_str(), &x.decided_by),
        ("shipping", &DecidedBy::Model),
        "10 labels: the model has taken over"
    );
}

#[test]
fn guards_win_in_every_mode() {
    let f = fixture();
    let m = model(20);
    for mode in [BlendMode::RulesOnly, BlendMode::RulesFirst, BlendMode::ModelFirst, BlendMode::Takeover] {
        let d = decider(mode);
        // A guard that assigns stays assigned, even against the model and a higher-precedence non-guard.
        let x = decide(&d, &f, Some(&m), "chargeback on my parcel parcel courier courier late");
        assert_eq!((x.class.as_str(), &x.decided_by), ("billing", &rule("chargeback")), "{mode:?}");
        assert_eq!(x.review, None, "{mode:?}");
        // A guard that sends to review always sends, whoever decides the class.
        let x = decide(&d, &f, Some(&m), "fraud on my parcel courier late");
        assert_eq!(x.review, Some(ReviewReason::Rule { id: "fraud".into() }), "{mode:?}");
        let x = decide(&d, &f, Some(&m), "fraud chargeback");
        assert_eq!(
            (&x.decided_by, &x.review),
            (&rule("chargeback"), &Some(ReviewReason::Rule { id: "fraud".into() })),
            "{mode:?}"
        );
    }
    // Guards stay active after takeover.
    let d = Decider { takeover_labels: 1.0, ..decider(BlendMode::Takeover) };
    let x = decide(&d, &f, Some(&m), "chargeback parcel courier");
    assert_eq!(x.decided_by, rule("chargeback"));
}

#[test]
fn review_policy_applies_to_the_model_but_not_to_rule_assignments() {
    let f = fixture();
    let d = Decider {
        policy: ReviewPolicy { min_confidence: 0.99, min_margin: 0.0, class_min_confidence: Default::default() },
        ..decider(BlendMode::RulesFirst)
    };
    let m = model(5);
    let x = decide(&d, &f, Some(&m), "card");
    assert_eq!(x.decided_by, DecidedBy::Model);
    assert!(matches!(x.review, Some(ReviewReason::LowConfidence { .. })), "{x:?}");
    let x = decide(&d, &f, Some(&m), "refund");
    assert_eq!((&x.decided_by, &x.review), (&rule("refund"), &None));
}

#[test]
fn without_rules_the_blend_equals_the_model_decision() {
    use sieveline::decide::{decide_by_model, DecideScratch};
    let f = fixture();
    let m = model(5);
    let d = decider(BlendMode::RulesFirst);
    for text in ["invoice charged parcel", "late courier", "card", "nothing known here"] {
        let fields = [FieldText { field: 0, text, weight: 1.0 }];
        let a = d.decide(&f.analyzer, None, Some(&m), "v1", Some("r1".into()), &fields, &mut BlendScratch::default());
        let mut bag = TermBag::new();
        f.analyzer.analyze_fields([(text, 1.0)], &mut Default::default(), &mut bag);
        let (b, _) =
            decide_by_model(&m, "v1", Some("r1".into()), &bag, &ReviewPolicy::none(), 3, &mut DecideScratch::default());
        assert_eq!(a, b, "{text}");
    }
}

#[test]
fn one_scratch_follows_swapped_models_and_rule_sets() {
    // A worker's scratch caches which model class a rule's class is. A model
    // with the same classes in another order, a model without the class, and
    // another rule set must each be read afresh.
    let f = fixture();
    let d = decider(BlendMode::ModelFirst);
    let fields = [FieldText { field: 0, text: "parcel", weight: 1.0 }];
    let mut s = BlendScratch::default();
    let mut go = |rules: &RuleSet, m: &Model| d.decide(&f.analyzer, Some(rules), Some(m), "v", None, &fields, &mut s);
    let m = model(5);
    let x = go(&f.rules, &m);
    assert_eq!(x.class, "shipping");
    // The same counts with the classes in the other order: the boost follows "shipping".
    let mut swapped = m.clone();
    swapped.reorder_classes(&["shipping".to_string(), "billing".to_string()]).unwrap();
    let y = go(&f.rules, &swapped);
    assert_eq!(y.class, "shipping");
    assert!((y.confidence - x.confidence).abs() < 1e-12, "{} vs {}", y.confidence, x.confidence);
    // A model without the rule's class: no boost, and no stale index.
    let mut other = Model::new(
        NbParams::multinomial(1.0),
        Settings::defaults().analyzer,
        vec!["billing".into(), "returns".into()],
        Vocabulary::new(VocabularyKind::Interned, 1000, 0),
    )
    .unwrap();
    for _ in 0..5 {
        other.learn(&TermBag::from_pairs([("parcel", 1.0), ("label", 1.0)]), "returns", 1.0).unwrap();
        other.learn(&TermBag::from_pairs([("card", 1.0)]), "billing", 1.0).unwrap();
    }
    let z = go(&f.rules, &other);
    assert_eq!((z.class.as_str(), &z.decided_by), ("returns", &DecidedBy::Model));
    let unboosted = {
        let mut bag = TermBag::new();
        f.analyzer.analyze_fields([("parcel", 1.0)], &mut Default::default(), &mut bag);
        other.score(&bag, &mut ScoreScratch::default()).confidence
    };
    assert!((z.confidence - (unboosted * 1e9).round() / 1e9).abs() < 1e-12, "nothing was boosted");
    // Another rule set whose class list starts with "shipping": indexes differ from the first set's.
    let second = rules::from_str(
        "[[rule]]\nid = \"parcel-to-billing\"\nclass = \"billing\"\naction = \"boost\"\nlog_odds = 40.0\n[[rule.when]]\nany = [\"parcel\"]\n",
        "second.toml",
        &f.analyzer,
        &["body".to_string()],
    )
    .unwrap();
    let w = go(&second, &m);
    assert_eq!((w.class.as_str(), &w.decided_by), ("billing", &rule("parcel-to-billing")));
    let v = go(&f.rules, &m);
    assert_eq!(v, x, "back to the first pair: the same decision as at first");
}
