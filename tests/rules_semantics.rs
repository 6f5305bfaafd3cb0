//! Rule semantics: any/all/none with minimum counts, field scope, phrases, collapsed-term conditions, raw regex, and precedence; the hot-path matcher agrees with the slow explainer.

use sieveline::rules::{self, Action, FieldText, MatchScratch, RecordTerms, RuleSet};
use sieveline::settings::{PatternSetting, Settings};
use sieveline::text::{Analyzer, AnalyzerScratch};

const FIELDS: [&str; 3] = ["subject", "body", "text"];

fn fields() -> Vec<String> {
    FIELDS.iter().map(|s| s.to_string()).collect()
}

fn compile_with(text: &str, analyzer: &Analyzer) -> RuleSet {
    rules::from_str(text, "test.toml", analyzer, &fields()).unwrap_or_else(|e| panic!("{e}"))
}

fn analyzer() -> Analyzer {
    Analyzer::new(&Settings::defaults().analyzer).unwrap()
}

/// The ids of the rules that fire, in precedence order; also checks the explainer agrees.
fn fire_with(set: &RuleSet, a: &Analyzer, record: &[(&str, &str)]) -> Vec<String> {
    let texts: Vec<FieldText> = record
        .iter()
        .map(|(f, t)| FieldText { field: FIELDS.iter().position(|x| x == f).unwrap(), text: t, weight: 1.0 })
        .collect();
    let mut terms = RecordTerms::new();
    terms.analyze(a, &texts, &mut AnalyzerScratch::default());
    let mut s = MatchScratch::default();
    let fired: Vec<String> = set.matches(&terms, &texts, &mut s).iter().map(|&r| set.rule(r).id.clone()).collect();
    let explained: Vec<String> =
        set.explain(&terms, &texts, false).into_iter().filter(|t| t.fired).map(|t| t.id).collect();
    assert_eq!(fired, explained, "matcher and explainer disagree on {record:?}");
    fired
}

fn fire(set: &RuleSet, record: &[(&str, &str)]) -> Vec<String> {
    fire_with(set, &analyzer(), record)
}

fn rule(id: &str, when: &str) -> String {
    format!("[[rule]]\nid = \"{id}\"\nclass = \"c-{id}\"\naction = \"assign\"\n{when}\n")
}

#[test]
fn any_fires_on_one_listed_term_and_at_least_counts_distinct_terms() {
    let text = rule("one", "[[rule.when]]\nany = [\"refund\", \"money back\"]")
        + &rule("two", "[[rule.when]]\nany = [\"refund\", \"late\", \"broken\"]\nat_least = 2");
    let set = compile_with(&text, &analyzer());
    assert_eq!(fire(&set, &[("body", "I want a Refund!")]), ["one"]);
    assert_eq!(fire(&set, &[("body", "give me my money back")]), ["one"]);
    // A repeated term is one distinct term: not enough for at_least = 2.
    assert_eq!(fire(&set, &[("body", "refund refund refund")]), ["one"]);
    assert_eq!(fire(&set, &[("body", "late and broken")]), ["two"]);
    assert_eq!(fire(&set, &[("body", "refund, it came late")]), ["one", "two"]);
    assert!(fire(&set, &[("body", "nothing to see")]).is_empty());
}

#[test]
fn all_needs_every_term_and_none_blocks() {
    let text = rule("both", "[[rule.when]]\nall = [\"card\", \"declined\"]")
        + &rule(
            "returns",
            "[[rule.when]]\nany = [\"refund\", \"return label\"]\n[[rule.when]]\nnone = [\"newsletter\"]",
        );
    let set = compile_with(&text, &analyzer());
    assert_eq!(fire(&set, &[("body", "my card was declined")]), ["both"]);
    assert!(fire(&set, &[("body", "my card works")]).is_empty());
    assert_eq!(fire(&set, &[("body", "please send a return label")]), ["returns"]);
    // The example from the issue: about returns unless it also mentions the newsletter.
    assert!(fire(&set, &[("body", "refund me for the newsletter")]).is_empty());
    assert!(
        fire(&set, &[("subject", "newsletter"), ("body", "refund")]).is_empty(),
        "an unscoped none looks at every field"
    );
}

#[test]
fn field_scope_limits_a_condition_to_one_field() {
    let text = rule("subj", "[[rule.when]]\nfield = \"subject\"\nany = [\"urgent\"]")
        + &rule("body-none", "[[rule.when]]\nany = [\"invoice\"]\n[[rule.when]]\nfield = \"body\"\nnone = [\"paid\"]");
    let set = compile_with(&text, &analyzer());
    assert_eq!(fire(&set, &[("subject", "URGENT: help"), ("body", "x")]), ["subj"]);
    assert!(fire(&set, &[("subject", "help"), ("body", "this is urgent")]).is_empty());
    assert_eq!(
        fire(&set, &[("subject", "invoice paid"), ("body", "thanks")]),
        ["body-none"],
        "paid is only forbidden in the body"
    );
    assert!(fire(&set, &[("subject", "invoice"), ("body", "it is paid")]).is_empty());
}

#[test]
fn a_phrase_matches_its_words_in_order_within_one_field() {
    let set = compile_with(&rule("p", "[[rule.when]]\nany = [\"return label\"]"), &analyzer());
    assert_eq!(fire(&set, &[("body", "where is my Return Label?")]), ["p"]);
    assert!(fire(&set, &[("body", "label for the return")]).is_empty());
    assert!(fire(&set, &[("body", "return the parcel, label attached")]).is_empty());
    assert!(fire(&set, &[("subject", "return"), ("body", "label")]).is_empty(), "a phrase does not span fields");
    // With bigrams on, the bag interleaves "return label" bigrams; the phrase still matches words in order.
    let mut s = Settings::defaults().analyzer;
    s.bigrams = true;
    let a = Analyzer::new(&s).unwrap();
    let set = compile_with(&rule("p", "[[rule.when]]\nany = [\"return label\"]"), &a);
    assert_eq!(fire_with(&set, &a, &[("body", "need a return label now")]), ["p"]);
    assert!(fire_with(&set, &a, &[("body", "return my label")]).is_empty());
}

#[test]
fn conditions_on_collapsed_terms_match_any_value_of_the_family() {
    let mut s = Settings::defaults().analyzer;
    s.patterns.push(PatternSetting { name: "order_no".into(), regex: r"\b\d{4}-[A-Z]{2}\b".into() });
    let a = Analyzer::new(&s).unwrap();
    let text = rule("order", "[[rule.when]]\nall = [\"order\", \"<order_no>\"]")
        + &rule("ip", "[[rule.when]]\nany = [\"from <ipv4>\"]")
        + &rule("num", "[[rule.when]]\nany = [\"<num> times\"]");
    let set = compile_with(&text, &a);
    assert_eq!(fire_with(&set, &a, &[("body", "order 4711-AB is late")]), ["order"]);
    assert_eq!(fire_with(&set, &a, &[("body", "ORDER 1234-CD")]), ["order"]);
    assert!(
        fire_with(&set, &a, &[("body", "order 4711 is late")]).is_empty(),
        "a plain number is <num>, not <order_no>"
    );
    assert_eq!(fire_with(&set, &a, &[("text", "login from 10.0.0.12 failed")]), ["ip"]);
    assert_eq!(fire_with(&set, &a, &[("text", "retried 17 times")]), ["num"]);
}

#[test]
fn regex_runs_on_raw_field_text_with_scope_and_match_counts() {
    let text = rule("rma", "[[rule.when]]\nregex = '\\bRMA-\\d{6}\\b'")
        + &rule("twice", "[[rule.when]]\nfield = \"body\"\nregex = '(?i)error'\nat_least = 2")
        + &rule("mixed", "[[rule.when]]\nany = [\"refund\"]\n[[rule.when]]\nfield = \"subject\"\nregex = '^Re:'");
    let set = compile_with(&text, &analyzer());
    // The regex sees the raw text, so case and punctuation count (the analyzer would fold them).
    assert_eq!(fire(&set, &[("body", "see RMA-123456 please")]), ["rma"]);
    assert!(fire(&set, &[("body", "see rma-123456 please")]).is_empty());
    assert!(fire(&set, &[("body", "RMA-1234567")]).is_empty());
    assert_eq!(fire(&set, &[("body", "Error then ERROR again")]), ["twice"]);
    assert!(fire(&set, &[("body", "one error"), ("subject", "error")]).is_empty(), "only body matches count");
    assert_eq!(fire(&set, &[("subject", "Re: refund"), ("body", "x")]), ["mixed"]);
    assert!(fire(&set, &[("subject", "refund"), ("body", "Re: x")]).is_empty());
}

#[test]
fn fired_rules_come_in_precedence_order() {
    // Guards first; then higher priority; at equal priority review, assign, boost; then file order.
    let r = |id: &str, action: &str, priority: i32, guard: bool| {
        let extra = if action == "boost" { "log_odds = 1.0\n" } else { "" };
        format!("[[rule]]\nid = \"{id}\"\nclass = \"x\"\naction = \"{action}\"\n{extra}priority = {priority}\nguard = {guard}\n[[rule.when]]\nany = [\"hello\"]\n")
    };
    let text = [
        r("boost-5", "boost", 5, false),
        r("assign-5", "assign", 5, false),
        r("review-5", "review", 5, false),
        r("assign-9", "assign", 9, false),
        r("guard-0", "assign", 0, true),
        r("assign-5b", "assign", 5, false),
        r("guard-1", "review", 1, true),
    ]
    .concat();
    let set = compile_with(&text, &analyzer());
    assert_eq!(
        fire(&set, &[("body", "hello")]),
        ["guard-1", "guard-0", "assign-9", "review-5", "assign-5", "assign-5b", "boost-5"]
    );
    assert_eq!(set.rule(0).action, Action::Boost(1.0));
}

#[test]
fn precedence_holds_in_small_and_large_rule_sets() {
    // Small sets order fired rules with a bitmap by rank, sets over 4096 rules
    // by a sort; both must give the explainer's order. Priorities run against
    // file order, so precedence and file order differ.
    // Letters only, so no term looks like a code the analyzer collapses.
    let word = |i: usize| -> String { format!("w{}{}{}", (b'a' + (i / 676) as u8) as char, (b'a' + (i / 26 % 26) as u8) as char, (b'a' + (i % 26) as u8) as char) };
    for n in [40usize, 4100] {
        let mut text = String::new();
        for i in 0..n {
            let priority = (i % 7) as i32 - 3;
            let common = if i % 10 == 3 { "shared" } else { "other" };
            text += &format!(
                "[[rule]]\nid = \"r{i}\"\nclass = \"x\"\naction = \"assign\"\npriority = {priority}\n[[rule.when]]\nany = [\"{common}\", \"{}\"]\n",
                word(i)
            );
        }
        let set = compile_with(&text, &analyzer());
        let record = format!("shared {} {} {} {} {} {}", word(0), word(1), word(2), word(9), word(17), word(3999));
        let fired = fire(&set, &[("body", &record)]);
        let mut want: Vec<usize> = (0..n).filter(|i| i % 10 == 3 || [0, 1, 2, 9, 17, 3999].contains(i)).collect();
        want.sort_by_key(|&i| (-((i % 7) as i32 - 3), i));
        assert_eq!(fired, want.iter().map(|i| format!("r{i}")).collect::<Vec<_>>(), "{n} rules");
    }
}

#[test]
fn one_term_in_many_rules_is_one_index_entry() {
    let mut text = String::new();
    for i in 0..50 {
        text += &rule(&format!("r{i}"), &format!("[[rule.when]]\nany = [\"card\", \"w{i}\"]\nat_least = 2"));
    }
    let set = compile_with(&text, &analyzer());
    assert_eq!(set.len(), 50);
    assert_eq!(set.indexed_terms(), 51, "card once, plus w0..w49");
    assert_eq!(fire(&set, &[("body", "card w7 w9")]), ["r7", "r9"]);
}

#[test]
fn scratch_is_reusable_across_records_and_rule_sets() {
    let a = analyzer();
    let one = compile_with(&rule("a", "[[rule.when]]\nany = [\"alpha\"]"), &a);
    let two = compile_with(
        &(rule("b", "[[rule.when]]\nany = [\"beta\"]") + &rule("c", "[[rule.when]]\nany = [\"gamma\"]")),
        &a,
    );
    let mut s = MatchScratch::default();
    let mut terms = RecordTerms::new();
    let mut sc = AnalyzerScratch::default();
    let mut run = |set: &RuleSet, text: &str, s: &mut MatchScratch| -> Vec<String> {
        let f = [FieldText { field: 1, text, weight: 1.0 }];
        terms.analyze(&a, &f, &mut sc);
        set.matches(&terms, &f, s).iter().map(|&r| set.rule(r).id.clone()).collect()
    };
    assert_eq!(run(&one, "alpha", &mut s), ["a"]);
    assert!(run(&one, "beta", &mut s).is_empty(), "nothing from the previous record is left");
    assert_eq!(run(&two, "beta gamma", &mut s), ["b", "c"]);
    assert_eq!(run(&one, "alpha beta", &mut s), ["a"]);
}
