//! Validation at load: for each kind of bad rule the message names the file, the line and the rule, and no partial rule set is returned.
//!
//! In every case the offending line of the test text carries the marker `#<-`,
//! and the expected line number is computed from it.

use sieveline::rules::{self, RulesError};
use sieveline::settings::Settings;
use sieveline::text::Analyzer;

fn fields() -> Vec<String> {
    ["subject", "body", "text"].iter().map(|s| s.to_string()).collect()
}

fn refuse_with(text: &str, settings: &Settings) -> String {
    let a = Analyzer::new(&settings.analyzer).unwrap();
    match rules::from_str(text, "bad.toml", &a, &fields()) {
        Ok(set) => panic!("accepted a bad file with {} rules:\n{text}", set.len()),
        Err(e) => e.to_string(),
    }
}

/// Refused; the message names bad.toml, the marked line and `rule "id"` (when `rule` is given) and contains `what`.
fn check(text: &str, rule: Option<&str>, what: &str) {
    check_with(text, rule, what, &Settings::defaults())
}

fn check_with(text: &str, rule: Option<&str>, what: &str, settings: &Settings) {
    let line = text.lines().position(|l| l.contains("#<-")).expect("test text marks a line") + 1;
    let msg = refuse_with(text, settings);
    assert!(msg.contains(&format!("bad.toml:{line}:")), "expected line {line} in: {msg}");
    if let Some(id) = rule {
        assert!(msg.contains(&format!("rule \"{id}\"")), "expected rule {id} in: {msg}");
    }
    assert!(msg.contains(what), "expected {what:?} in: {msg}");
}

const HEAD: &str = "# a rules file\n";

#[test]
fn unknown_key_in_a_rule() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"r1\"\nclass = \"c\"\naction = \"assign\"\nprioritty = 3 #<-\n[[rule.when]]\nany = [\"word\"]\n"),
        Some("r1"),
        "prioritty",
    );
}

#[test]
fn unknown_key_in_a_when_block() {
    check(
        &format!(
            "{HEAD}[[rule]]\nid = \"r1\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nanyy = [\"word\"] #<-\n"
        ),
        Some("r1"),
        "anyy",
    );
}

#[test]
fn wrong_type() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"r1\"\nclass = \"c\"\naction = \"assign\"\npriority = \"high\" #<-\n[[rule.when]]\nany = [\"word\"]\n"),
        Some("r1"),
        "priority",
    );
}

#[test]
fn toml_syntax_error() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"r1\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\" \"other\"] #<-\n"),
        Some("r1"),
        "",
    );
}

#[test]
fn missing_class() {
    let text = format!("{HEAD}[[rule]] #<-\nid = \"r1\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\"]\n");
    let msg = refuse_with(&text, &Settings::defaults());
    assert!(msg.contains("class") && msg.contains("rule \"r1\"") && msg.contains("bad.toml:"), "{msg}");
}

#[test]
fn duplicate_id_names_the_first_use() {
    let r = "class = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\"]\n";
    check(
        &format!("{HEAD}[[rule]]\nid = \"same\"\n{r}[[rule]]\nid = \"same\" #<-\n{r}"),
        Some("same"),
        "already used by the rule at line 3",
    );
}

#[test]
fn bad_id_characters() {
    check(&format!("{HEAD}[[rule]]\nid = \"has space\" #<-\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\"]\n"), Some("has space"), "only letters");
}

#[test]
fn unknown_action() {
    check(
        &format!(
            "{HEAD}[[rule]]\nid = \"r1\"\nclass = \"c\"\naction = \"route\" #<-\n[[rule.when]]\nany = [\"word\"]\n"
        ),
        Some("r1"),
        "unknown action \"route\"",
    );
}

#[test]
fn boost_without_log_odds_and_log_odds_without_boost() {
    check(
        &format!(
            "{HEAD}[[rule]]\nid = \"b\"\nclass = \"c\"\naction = \"boost\" #<-\n[[rule.when]]\nany = [\"word\"]\n"
        ),
        Some("b"),
        "needs log_odds",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"a\"\nclass = \"c\"\naction = \"assign\"\nlog_odds = 2.0 #<-\n[[rule.when]]\nany = [\"word\"]\n"),
        Some("a"),
        "only for action \"boost\"",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"big\"\nclass = \"c\"\naction = \"boost\"\nlog_odds = 500.0 #<-\n[[rule.when]]\nany = [\"word\"]\n"),
        Some("big"),
        "log_odds = 500",
    );
}

#[test]
fn priority_out_of_range() {
    check(&format!("{HEAD}[[rule]]\nid = \"p\"\nclass = \"c\"\naction = \"assign\"\npriority = 5000 #<-\n[[rule.when]]\nany = [\"word\"]\n"), Some("p"), "out of range");
}

#[test]
fn rule_without_conditions_or_with_only_none() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"empty\" #<-\nclass = \"c\"\naction = \"assign\"\n"),
        Some("empty"),
        "no [[rule.when]]",
    );
    check(
        &format!(
            "{HEAD}[[rule]]\nid = \"neg\" #<-\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nnone = [\"word\"]\n"
        ),
        Some("neg"),
        "only `none` conditions",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"blank\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]] #<-\nfield = \"body\"\n[[rule.when]]\nany = [\"word\"]\n"),
        Some("blank"),
        "no condition",
    );
}

#[test]
fn empty_list() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"e\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [] #<-\n"),
        Some("e"),
        "empty list",
    );
}

#[test]
fn unknown_field_lists_the_known_ones() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"f\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nfield = \"subjet\" #<-\nany = [\"word\"]\n"),
        Some("f"),
        "unknown field \"subjet\": the input fields (input.fields) are subject, body, text",
    );
}

#[test]
fn regex_that_does_not_compile() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"rx\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nregex = 'a(b' #<-\n"),
        Some("rx"),
        "regex does not compile",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"rx0\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nregex = '' #<-\n"),
        Some("rx0"),
        "empty",
    );
}

#[test]
fn at_least_problems() {
    check(
        &format!("{HEAD}[[rule]]\nid = \"n\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\", \"other\"]\nat_least = 3 #<-\n"),
        Some("n"),
        "expected 1 to 2",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"amb\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"word\"]\nregex = 'y'\nat_least = 1 #<-\n"),
        Some("amb"),
        "ambiguous",
    );
    check(
        &format!("{HEAD}[[rule]]\nid = \"lone\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nall = [\"word\"]\nat_least = 1 #<-\n"),
        Some("lone"),
        "neither",
    );
}

#[test]
fn terms_the_analyzer_cannot_produce() {
    // One letter: shorter than analyzer.min_token_len = 2.
    check(&format!("{HEAD}[[rule]]\nid = \"short\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"ok\",\n \"x\"] #<-\n"), Some("short"), "yields no terms");
    // A number collapses to <num>: written as is it would match every number.
    check(
        &format!(
            "{HEAD}[[rule]]\nid = \"num\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"42\"] #<-\n"
        ),
        Some("num"),
        "collapsed by the analyzer to <num>",
    );
    check(&format!("{HEAD}[[rule]]\nid = \"tok\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"<order_no>\"] #<-\n"), Some("tok"), "unknown class token <order_no>");
    let mut s = Settings::defaults();
    s.analyzer.collapse.ip_addresses = false;
    check_with(
        &format!(
            "{HEAD}[[rule]]\nid = \"off\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"<ipv4>\"] #<-\n"
        ),
        Some("off"),
        "analyzer.collapse.ip_addresses is off",
        &s,
    );
    let mut s = Settings::defaults();
    s.analyzer.stop_words = true;
    check_with(
        &format!(
            "{HEAD}[[rule]]\nid = \"stop\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"the\"] #<-\n"
        ),
        Some("stop"),
        "stop_words = true",
        &s,
    );
}

#[test]
fn a_term_listed_twice() {
    check(&format!("{HEAD}[[rule]]\nid = \"dup\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nany = [\"Card\", \"card\"] #<-\n"), Some("dup"), "listed twice");
}

#[test]
fn a_file_without_rules_and_an_unknown_top_level_key() {
    let msg = refuse_with("# nothing\n", &Settings::defaults());
    assert!(msg.contains("bad.toml:1:") && msg.contains("no [[rule]]"), "{msg}");
    check("rulez = 1 #<-\n", None, "rulez");
}

#[test]
fn every_problem_is_reported_and_no_set_is_returned() {
    let text = format!(
        "{HEAD}[[rule]]\nid = \"a\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nregex = '(' \n[[rule]]\nid = \"b\"\nclass = \"c\"\naction = \"assign\"\n[[rule.when]]\nfield = \"nope\"\nany = [\"word\"]\n"
    );
    let a = Analyzer::new(&Settings::defaults().analyzer).unwrap();
    let e = rules::from_str(&text, "bad.toml", &a, &fields()).unwrap_err();
    let RulesError::Invalid { problems, .. } = &e else { panic!("{e}") };
    assert_eq!(problems.len(), 2, "{e}");
    assert_eq!((problems[0].line, problems[0].rule.as_deref()), (7, Some("a")));
    assert_eq!((problems[1].line, problems[1].rule.as_deref()), (13, Some("b")));
    assert!(e.to_string().starts_with("rules file bad.toml has 2 problems:"), "{e}");
}

#[test]
fn a_missing_file_is_a_read_error_naming_it() {
    let s = Settings::defaults();
    let e = rules::load_for(&s, std::path::Path::new("/nonexistent/rules.toml")).unwrap_err();
    assert!(matches!(e, RulesError::Read { .. }));
    assert!(e.to_string().contains("/nonexistent/rules.toml"), "{e}");
}

#[test]
fn the_committed_example_files_are_valid() {
    // The Banking77 rules run with the single `text` field; the demo file with the default fields.
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let a = Analyzer::new(&Settings::defaults().analyzer).unwrap();
    for name in std::fs::read_dir(root.join("config/rules")).unwrap() {
        let path = name.unwrap().path();
        let set = rules::load(&path, &a, &fields()).unwrap_or_else(|e| panic!("{e}"));
        assert!(!set.is_empty(), "{}", path.display());
    }
}
