//! The compiled `RuleSet`: an immutable value built once from a file (rules, conditions, one term index, one regex set), shared by reference.
//!
//! A `RuleSet` is never mutated after it is built, so a service can hold it in
//! an `Arc`, load and validate a new one off the hot path, and swap the `Arc`
//! atomically (for example behind `arc_swap::ArcSwap`). Every record is then
//! matched against one whole set, old or new, never a mix.

use std::ops::Range;

use regex::{Regex, RegexSet};

use super::index::TermIndex;

/// What a rule does when it fires.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Action {
    /// Decide the class.
    Assign,
    /// Add this many log-odds to the class's log score before the posterior.
    Boost(f64),
    /// Send the record to a person.
    Review,
}

impl Action {
    pub fn name(&self) -> &'static str {
        match self {
            Action::Assign => "assign",
            Action::Boost(_) => "boost",
            Action::Review => "review",
        }
    }

    /// At equal priority: review before assign before boost.
    pub(crate) fn rank(&self) -> u8 {
        match self {
            Action::Review => 0,
            Action::Assign => 1,
            Action::Boost(_) => 2,
        }
    }
}

/// One rule as compiled.
#[derive(Debug, Clone, PartialEq)]
pub struct Rule {
    pub id: String,
    pub class: String,
    pub action: Action,
    pub priority: i32,
    pub guard: bool,
    pub note: Option<String>,
    /// Line of the rule's `id` in the file.
    pub line: usize,
    pub(crate) conds: Range<u32>,
    /// Index of `class` in `RuleSet::classes`.
    pub(crate) class_idx: u32,
}

/// The kind of a rule's action, without its payload.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Kind {
    Assign,
    Boost,
    Review,
}

/// What the matcher and the blend read of a rule, packed in one 32-byte
/// record beside `rules` (one cache line holds two rules), instead of several
/// arrays or the whole `Rule` with its strings.
#[derive(Debug, Clone, Copy)]
pub(crate) struct RuleMeta {
    /// Conditions counted while matching (every condition but `none` and
    /// deferred regexes); the rule is a candidate once all hold.
    pub need: u32,
    /// Precedence rank (0 first).
    pub rank: u32,
    pub class_idx: u32,
    pub kind: Kind,
    pub guard: bool,
    /// Whether it has a regex checked only once its other conditions hold.
    pub has_deferred: bool,
    /// A non-guard assign rule: `model_first` turns it into a boost.
    pub nonguard_assign: bool,
    /// A boost's log-odds; 0 for other actions.
    pub log_odds: f64,
    /// exp(log_odds): the blend multiplies these instead of taking an
    /// exponential per record; 1 for other actions.
    pub factor: f64,
}

impl RuleMeta {
    pub(crate) fn new(r: &Rule, need: u32, rank: u32, has_deferred: bool) -> RuleMeta {
        let (kind, log_odds) = match r.action {
            Action::Assign => (Kind::Assign, 0.0),
            Action::Boost(x) => (Kind::Boost, x),
            Action::Review => (Kind::Review, 0.0),
        };
        RuleMeta {
            need,
            rank,
            class_idx: r.class_idx,
            kind,
            guard: r.guard,
            has_deferred,
            nonguard_assign: kind == Kind::Assign && !r.guard,
            log_odds,
            factor: log_odds.exp(),
        }
    }
}

/// The kind of one condition.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CondKind {
    /// At least `at_least` distinct listed terms occur.
    Any,
    /// Every listed term occurs.
    All,
    /// No listed term occurs.
    None,
    /// The raw-text regex matches at least `at_least` times.
    Regex,
}

impl CondKind {
    pub fn name(&self) -> &'static str {
        match self {
            CondKind::Any => "any",
            CondKind::All => "all",
            CondKind::None => "none",
            CondKind::Regex => "regex",
        }
    }
}

/// One condition of a rule; all of a rule's conditions must hold.
#[derive(Debug, Clone)]
pub struct Cond {
    pub kind: CondKind,
    /// Index into the input fields, or `None` for every field.
    pub field: Option<usize>,
    /// Hits needed (`any`, `regex`), or the number of items (`all`); 0 for `none`.
    pub at_least: u32,
    pub(crate) items: Range<u32>,
    pub(crate) regex: Option<u32>,
    pub rule: u32,
    pub line: usize,
}

/// A listed term or phrase, as written and as analyzed.
#[derive(Debug, Clone)]
pub struct Item {
    pub text: String,
    /// One token for a term, several for a phrase (matched consecutively).
    pub tokens: Vec<Box<str>>,
    pub cond: u32,
}

/// An entry of the term index: this token starts an item of `cond` of `rule`.
/// Each item has exactly one posting, so per-record marks are kept by
/// posting index. 16 bytes, four to a cache line.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Posting {
    pub cond: u32,
    pub rule: u32,
    /// The condition's `at_least`: hits it needs, 0 for a `none` condition.
    pub need: u32,
    /// Field index or `ANY_FIELD` for every field, plus `PHRASE` when the item
    /// has more than one token (its tokens are in `RuleSet::phrase_items`).
    pub scope: u32,
}

impl Posting {
    /// The field index this posting is limited to, or `ANY_FIELD`.
    #[inline(always)]
    pub(crate) fn field(&self) -> u32 {
        self.scope & !PHRASE
    }

    #[inline(always)]
    pub(crate) fn is_phrase(&self) -> bool {
        self.scope & PHRASE != 0
    }
}

/// A posting's scope for every field (field indices are far below it).
pub(crate) const ANY_FIELD: u32 = u32::MAX >> 1;
/// The bit of `Posting::scope` marking a phrase.
pub(crate) const PHRASE: u32 = 1 << 31;

/// A validated, compiled rules file.
#[derive(Debug, Clone)]
pub struct RuleSet {
    pub(crate) source: String,
    pub(crate) fingerprint: String,
    pub(crate) analyzer_fingerprint: String,
    pub(crate) fields: Vec<String>,
    pub(crate) rules: Vec<Rule>,
    /// Per rule, what the matcher and the blend read of it.
    pub(crate) meta: Vec<RuleMeta>,
    pub(crate) conds: Vec<Cond>,
    pub(crate) items: Vec<Item>,
    /// First token → range of `postings`: the one lookup per record token.
    pub(crate) index: TermIndex,
    pub(crate) postings: Vec<Posting>,
    /// Per posting: its item in `items` (read only for phrases).
    pub(crate) posting_items: Vec<u32>,
    /// The regex conditions of rules that have no term condition, in one set
    /// run once per field text: for those rules a regex is what makes them candidates.
    pub(crate) regex_set: Option<RegexSet>,
    pub(crate) regexes: Vec<Regex>,
    /// `regex_set` index → condition.
    pub(crate) regex_conds: Vec<u32>,
    /// Per condition: a regex checked only once the rule's cheaper conditions hold.
    pub(crate) deferred: Vec<bool>,
    /// Precedence rank of each rule (0 first): guards, then priority, then action, then file order.
    pub(crate) rank: Vec<u32>,
    /// The rules in precedence order (the inverse of `rank`).
    pub(crate) by_rank: Vec<u32>,
    pub(crate) classes: Vec<String>,
    /// Identifies `classes` (fresh per compiled set; a clone keeps it), so the
    /// blend's rule-class → model-class cache can be keyed without names.
    pub(crate) classes_id: u64,
}

/// A fresh `RuleSet::classes_id`.
pub(crate) fn next_classes_id() -> u64 {
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(1);
    NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed)
}

impl RuleSet {
    /// The rules in file order.
    pub fn rules(&self) -> &[Rule] {
        &self.rules
    }

    pub fn rule(&self, i: u32) -> &Rule {
        &self.rules[i as usize]
    }

    #[inline]
    pub(crate) fn meta(&self, i: u32) -> &RuleMeta {
        &self.meta[i as usize]
    }

    /// The target class with this index in `classes`.
    #[inline]
    pub(crate) fn class_name(&self, class_idx: u32) -> &str {
        &self.classes[class_idx as usize]
    }

    pub fn len(&self) -> usize {
        self.rules.len()
    }

    pub fn is_empty(&self) -> bool {
        self.rules.is_empty()
    }

    /// The conditions of a rule.
    pub fn conditions(&self, rule: u32) -> &[Cond] {
        let r = &self.rules[rule as usize].conds;
        &self.conds[r.start as usize..r.end as usize]
    }

    /// The listed terms of a condition.
    pub fn items(&self, cond: &Cond) -> &[Item] {
        &self.items[cond.items.start as usize..cond.items.end as usize]
    }

    /// The regex of a regex condition.
    pub fn regex(&self, cond: &Cond) -> Option<&Regex> {
        cond.regex.map(|i| &self.regexes[i as usize])
    }

    /// The distinct target classes, sorted.
    pub fn classes(&self) -> &[String] {
        &self.classes
    }

    /// The input field names the set was compiled against; `Cond::field` indexes them.
    pub fn fields(&self) -> &[String] {
        &self.fields
    }

    pub fn field_index(&self, name: &str) -> Option<usize> {
        self.fields.iter().position(|f| f == name)
    }

    /// Where the set came from (a path, or a name for in-memory text).
    pub fn source(&self) -> &str {
        &self.source
    }

    /// blake3 of the file text, first 16 hex digits: tells two loaded versions apart.
    pub fn fingerprint(&self) -> &str {
        &self.fingerprint
    }

    /// The fingerprint of the analyzer the terms were compiled with. Matching
    /// records analyzed with other settings would compare different terms.
    pub fn analyzer_fingerprint(&self) -> &str {
        &self.analyzer_fingerprint
    }

    /// Distinct first tokens in the term index (for reports and benches).
    pub fn indexed_terms(&self) -> usize {
        self.index.len()
    }

    /// The precedence rank of a rule (0 is considered first).
    pub fn rank(&self, rule: u32) -> u32 {
        self.rank[rule as usize]
    }
}
