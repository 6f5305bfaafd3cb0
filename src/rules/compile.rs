//! Validate a rules file and compile it into a `RuleSet`: every problem is collected with its line and rule, and a file with any problem yields no set.

use std::collections::{BTreeSet, HashMap};

use regex::{Regex, RegexSet};
use rustc_hash::FxHashMap;

use super::error::{Problem, RulesError};
use super::format::{line_of, rule_id_at, RawFile, RawRule, RawWhen};
use super::index::TermIndex;
use super::ruleset::{Action, Cond, CondKind, Item, Posting, Rule, RuleMeta, RuleSet, ANY_FIELD, PHRASE};
use crate::settings::AnalyzerSettings;
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

/// The largest |log_odds| a boost may carry; beyond this a boost is an assignment in disguise.
pub const MAX_LOG_ODDS: f64 = 50.0;
/// Priorities are integers in this range.
pub const PRIORITY_RANGE: std::ops::RangeInclusive<i64> = -1000..=1000;

/// Compile rules text. `source` names the file in messages; `fields` are the
/// input field names (`input.fields`) that `field = ...` may refer to.
pub fn compile(text: &str, source: &str, analyzer: &Analyzer, fields: &[String]) -> Result<RuleSet, RulesError> {
    let raw: RawFile = toml::from_str(text).map_err(|e| {
        let span = e.span();
        let line = span.as_ref().map(|s| line_of(text, s.start)).unwrap_or(1);
        let rule = span.as_ref().and_then(|s| rule_id_at(text, s.start));
        let mut message = e.message().trim().replace('\n', " ");
        if let Some(l) = span.as_ref().and_then(|s| {
            let at = s.start.min(text.len());
            let from = text[..at].rfind('\n').map_or(0, |i| i + 1);
            text[from..].lines().next()
        }) {
            let l = l.trim();
            if !l.is_empty() && !l.starts_with("[[") {
                message.push_str(&format!(" (at `{}`)", l));
            }
        }
        RulesError::Invalid { path: source.to_string(), problems: vec![Problem { line, rule, message }] }
    })?;
    let mut b = Builder::new(text, analyzer, fields);
    if raw.rule.is_empty() {
        b.problem(1, None, "the file has no [[rule]] tables".into());
    }
    let mut seen: HashMap<String, usize> = HashMap::new();
    for r in &raw.rule {
        let r = r.get_ref();
        let id = r.id.get_ref().clone();
        let line = b.line(r.id.span().start);
        if let Some(first) = seen.get(&id) {
            b.problem(line, Some(&id), format!("the id is already used by the rule at line {first}"));
        } else {
            seen.insert(id.clone(), line);
        }
        b.rule(r);
    }
    if !b.problems.is_empty() {
        b.problems.sort_by_key(|p| p.line);
        return Err(RulesError::Invalid { path: source.to_string(), problems: b.problems });
    }
    Ok(b.finish(text, source))
}

struct Builder<'a> {
    text: &'a str,
    /// Byte offsets of the text's newlines.
    newlines: Vec<usize>,
    analyzer: &'a Analyzer,
    fields: &'a [String],
    problems: Vec<Problem>,
    rules: Vec<Rule>,
    conds: Vec<Cond>,
    items: Vec<Item>,
    regexes: Vec<Regex>,
    regex_conds: Vec<u32>,
    scratch: AnalyzerScratch,
    bag: TermBag,
}

impl<'a> Builder<'a> {
    fn new(text: &'a str, analyzer: &'a Analyzer, fields: &'a [String]) -> Self {
        Builder {
            text,
            newlines: text.bytes().enumerate().filter(|&(_, b)| b == b'\n').map(|(i, _)| i).collect(),
            analyzer,
            fields,
            problems: Vec::new(),
            rules: Vec::new(),
            conds: Vec::new(),
            items: Vec::new(),
            regexes: Vec::new(),
            regex_conds: Vec::new(),
            scratch: AnalyzerScratch::default(),
            bag: TermBag::new(),
        }
    }

    /// `format::line_of`, by binary search over the newlines found once (a
    /// scan per call would make compiling a large file quadratic).
    fn line(&self, offset: usize) -> usize {
        let offset = offset.min(self.text.len());
        self.newlines.partition_point(|&p| p < offset) + 1
    }

    fn problem(&mut self, line: usize, rule: Option<&str>, message: String) {
        self.problems.push(Problem { line, rule: rule.map(str::to_string), message });
    }

    fn rule(&mut self, r: &RawRule) {
        let id = r.id.get_ref().as_str();
        let id_line = self.line(r.id.span().start);
        if id.is_empty() || !id.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.')) {
            self.problem(
                id_line,
                Some(id),
                "the id must be non-empty and use only letters, digits, '-', '_' and '.'".into(),
            );
        }
        let class = r.class.get_ref().trim();
        if class.is_empty() {
            self.problem(self.line(r.class.span().start), Some(id), "the class is empty".into());
        }
        let action_line = self.line(r.action.span().start);
        let action = match (r.action.get_ref().as_str(), &r.log_odds) {
            ("assign", None) => Some(Action::Assign),
            ("review", None) => Some(Action::Review),
            ("boost", Some(x)) => {
                let v = *x.get_ref();
                if !(v.is_finite() && v != 0.0 && v.abs() <= MAX_LOG_ODDS) {
                    self.problem(
                        self.line(x.span().start),
                        Some(id),
                        format!("log_odds = {v} is not allowed: expected a non-zero number from -{MAX_LOG_ODDS} to {MAX_LOG_ODDS}"),
                    );
                    None
                } else {
                    Some(Action::Boost(v))
                }
            }
            ("boost", None) => {
                self.problem(
                    action_line,
                    Some(id),
                    "action \"boost\" needs log_odds = <number>, the log-odds added to the class".into(),
                );
                None
            }
            ("assign" | "review", Some(x)) => {
                self.problem(
                    self.line(x.span().start),
                    Some(id),
                    format!("log_odds is only for action \"boost\", not {:?}", r.action.get_ref()),
                );
                None
            }
            (other, _) => {
                self.problem(
                    action_line,
                    Some(id),
                    format!("unknown action {other:?}: expected \"assign\", \"boost\" or \"review\""),
                );
                None
            }
        };
        let priority = match &r.priority {
            None => 0,
            Some(p) if PRIORITY_RANGE.contains(p.get_ref()) => *p.get_ref() as i32,
            Some(p) => {
                self.problem(
                    self.line(p.span().start),
                    Some(id),
                    format!("priority = {} is out of range: expected an integer from -1000 to 1000", p.get_ref()),
                );
                0
            }
        };
        let rule_index = self.rules.len() as u32;
        let first_cond = self.conds.len() as u32;
        if r.when.is_empty() {
            self.problem(id_line, Some(id), "the rule has no [[rule.when]] block, so it could never be checked".into());
        }
        for w in &r.when {
            let line = self.line(w.span().start);
            self.when(w.get_ref(), line, id, rule_index);
        }
        let conds = first_cond..self.conds.len() as u32;
        // Judged on what was written, so a condition refused above is not reported twice.
        let positive = r.when.iter().any(|w| {
            let w = w.get_ref();
            w.any.is_some() || w.all.is_some() || w.regex.is_some()
        });
        if !r.when.is_empty() && !positive {
            self.problem(
                id_line,
                Some(id),
                "the rule has only `none` conditions, so it would fire on almost every record; add an `any`, `all` or `regex`".into(),
            );
        }
        self.rules.push(Rule {
            id: id.to_string(),
            class: class.to_string(),
            action: action.unwrap_or(Action::Assign),
            priority,
            guard: r.guard.as_ref().is_some_and(|g| *g.get_ref()),
            note: r.note.as_ref().map(|n| n.get_ref().clone()),
            line: id_line,
            conds,
            class_idx: 0,
        });
    }

    fn when(&mut self, w: &RawWhen, block_line: usize, id: &str, rule: u32) {
        let field = match &w.field {
            None => None,
            Some(f) => match self.fields.iter().position(|x| x == f.get_ref()) {
                Some(i) => Some(i),
                None => {
                    let known = self.fields.join(", ");
                    self.problem(
                        self.line(f.span().start),
                        Some(id),
                        format!("unknown field {:?}: the input fields (input.fields) are {known}", f.get_ref()),
                    );
                    None
                }
            },
        };
        let lists = [(CondKind::Any, &w.any), (CondKind::All, &w.all), (CondKind::None, &w.none)];
        let present = lists.iter().filter(|(_, l)| l.is_some()).count() + usize::from(w.regex.is_some());
        if present == 0 {
            self.problem(
                block_line,
                Some(id),
                "the `when` block has no condition: give any, all, none or regex".into(),
            );
            return;
        }
        if let Some(n) = &w.at_least {
            let line = self.line(n.span().start);
            if w.any.is_some() && w.regex.is_some() {
                self.problem(
                    line,
                    Some(id),
                    "at_least is ambiguous in a block with both `any` and `regex`: split them into two blocks".into(),
                );
            } else if w.any.is_none() && w.regex.is_none() {
                self.problem(
                    line,
                    Some(id),
                    "at_least counts `any` terms or `regex` matches, and this block has neither".into(),
                );
            }
        }
        for (kind, list) in lists {
            let Some(list) = list else { continue };
            let list_line = self.line(list.span().start);
            if list.get_ref().is_empty() {
                self.problem(list_line, Some(id), format!("`{}` is an empty list", kind.name()));
                continue;
            }
            let at_least = match kind {
                CondKind::Any => {
                    match &w.at_least {
                        None => 1,
                        Some(n) => {
                            let v = *n.get_ref();
                            let len = list.get_ref().len() as i64;
                            if v < 1 || v > len {
                                self.problem(
                                self.line(n.span().start),
                                Some(id),
                                format!("at_least = {v} is not possible: expected 1 to {len}, the number of `any` terms"),
                            );
                            }
                            v.clamp(1, len) as u32
                        }
                    }
                }
                CondKind::All => list.get_ref().len() as u32,
                _ => 0,
            };
            let cond = self.conds.len() as u32;
            let first_item = self.items.len() as u32;
            let mut dup = BTreeSet::new();
            for item in list.get_ref() {
                let line = self.line(item.span().start);
                match self.analyze_item(item.get_ref()) {
                    Err(msg) => self.problem(line, Some(id), msg),
                    Ok(tokens) => {
                        if !dup.insert(tokens.clone()) {
                            self.problem(
                                line,
                                Some(id),
                                format!(
                                    "{:?} is listed twice in `{}` (after analysis: {})",
                                    item.get_ref(),
                                    kind.name(),
                                    tokens.join(" ")
                                ),
                            );
                            continue;
                        }
                        self.items.push(Item { text: item.get_ref().clone(), tokens, cond });
                    }
                }
            }
            let items = first_item..self.items.len() as u32;
            self.conds.push(Cond { kind, field, at_least, items, regex: None, rule, line: list_line });
        }
        if let Some(re) = &w.regex {
            let line = self.line(re.span().start);
            let at_least = match &w.at_least {
                Some(n) if w.any.is_none() => {
                    let v = *n.get_ref();
                    if v < 1 {
                        self.problem(
                            self.line(n.span().start),
                            Some(id),
                            format!("at_least = {v}: expected at least 1"),
                        );
                    }
                    v.max(1) as u32
                }
                _ => 1,
            };
            match Regex::new(re.get_ref()) {
                Err(e) => {
                    self.problem(line, Some(id), format!("the regex does not compile: {}", one_line(&e.to_string())))
                }
                Ok(_) if re.get_ref().is_empty() => {
                    self.problem(line, Some(id), "the regex is empty and would match everything".into())
                }
                Ok(rx) => {
                    let cond = self.conds.len() as u32;
                    let ri = self.regexes.len() as u32;
                    self.regexes.push(rx);
                    self.regex_conds.push(cond);
                    self.conds.push(Cond {
                        kind: CondKind::Regex,
                        field,
                        at_least,
                        items: self.items.len() as u32..self.items.len() as u32,
                        regex: Some(ri),
                        rule,
                        line,
                    });
                }
            }
        }
    }

    /// A listed term as the analyzer sees it: the tokens it must match in order.
    fn analyze_item(&mut self, text: &str) -> Result<Vec<Box<str>>, String> {
        let mut tokens: Vec<Box<str>> = Vec::new();
        if text.trim().is_empty() {
            return Err("a listed term is empty".into());
        }
        for word in text.split_whitespace() {
            if let Some(name) = class_token_name(word) {
                check_class_token(name, self.analyzer.settings())?;
                tokens.push(word.into());
                continue;
            }
            self.bag.clear();
            self.analyzer.analyze_field(word, 1.0, &mut self.scratch, &mut self.bag);
            for (t, _) in self.bag.iter() {
                if t.contains(' ') {
                    continue;
                }
                if t.starts_with('<') && t.ends_with('>') {
                    return Err(format!(
                        "{text:?} is collapsed by the analyzer to {t}, so it would match any such value; write {t} to mean that, or use a regex for this exact text"
                    ));
                }
                tokens.push(t.into());
            }
        }
        if tokens.is_empty() {
            let s = self.analyzer.settings();
            return Err(format!(
                "{text:?} yields no terms under the analyzer settings (min_token_len = {}, stop_words = {}), so it could never match",
                s.min_token_len, s.stop_words
            ));
        }
        Ok(tokens)
    }

    fn finish(self, text: &str, source: &str) -> RuleSet {
        let Builder { mut rules, conds, items, regexes, regex_conds, analyzer, fields, .. } = self;
        // The term index: first token → postings, grouped so one lookup finds them all.
        let mut by_token: FxHashMap<Box<str>, Vec<(Posting, u32)>> = FxHashMap::default();
        for (i, item) in items.iter().enumerate() {
            let c = &conds[item.cond as usize];
            // Field indices come from the settings' list of input fields, far
            // below the bits kept for "any field" and the phrase mark.
            let field = c.field.map_or(ANY_FIELD, |f| u32::try_from(f).ok().filter(|&f| f < ANY_FIELD).expect("field index below 2^31 - 1"));
            let phrase = if item.tokens.len() > 1 { PHRASE } else { 0 };
            let posting = Posting { cond: item.cond, rule: c.rule, need: c.at_least, scope: field | phrase };
            by_token.entry(item.tokens[0].clone()).or_default().push((posting, i as u32));
        }
        let mut keys: Vec<Box<str>> = by_token.keys().cloned().collect();
        keys.sort();
        let mut index = TermIndex::default();
        let mut postings = Vec::with_capacity(items.len());
        let mut posting_items = Vec::with_capacity(items.len());
        for k in keys {
            let v = by_token.remove(&k).expect("key listed");
            let start = postings.len() as u32;
            for (p, item) in v {
                postings.push(p);
                posting_items.push(item);
            }
            index.insert(&k, (start, postings.len() as u32));
        }
        // A regex in a rule that also has an `any` or `all` condition is checked
        // only for candidates whose other conditions hold (cheap tests first);
        // the others go into one set, run per field, to find candidates at all.
        let has_terms: Vec<bool> = rules
            .iter()
            .map(|r| {
                conds[r.conds.start as usize..r.conds.end as usize]
                    .iter()
                    .any(|c| matches!(c.kind, CondKind::Any | CondKind::All))
            })
            .collect();
        let mut deferred = vec![false; conds.len()];
        let mut set_conds = Vec::new();
        let mut set_patterns = Vec::new();
        for &ci in &regex_conds {
            let c = &conds[ci as usize];
            if has_terms[c.rule as usize] {
                deferred[ci as usize] = true;
            } else {
                set_conds.push(ci);
                set_patterns.push(regexes[c.regex.expect("regex condition") as usize].as_str().to_string());
            }
        }
        let regex_set = if set_patterns.is_empty() {
            None
        } else {
            Some(RegexSet::new(&set_patterns).expect("each regex compiled on its own"))
        };
        let regex_conds = set_conds;
        let counted = |r: &Rule| {
            (r.conds.start..r.conds.end)
                .filter(|&ci| conds[ci as usize].kind != CondKind::None && !deferred[ci as usize])
                .count() as u32
        };
        let rule_need: Vec<u32> = rules.iter().map(counted).collect();
        // Validation refuses rules with only `none` conditions, and a deferred
        // regex needs a term condition beside it, so every rule counts one.
        debug_assert!(rule_need.iter().all(|&n| n > 0), "a rule with nothing to count could never fire");
        let has_deferred: Vec<bool> =
            rules.iter().map(|r| (r.conds.start..r.conds.end).any(|ci| deferred[ci as usize])).collect();
        let mut order: Vec<u32> = (0..rules.len() as u32).collect();
        order.sort_by_key(|&i| {
            let r = &rules[i as usize];
            (!r.guard, -r.priority, r.action.rank(), i)
        });
        let mut rank = vec![0u32; rules.len()];
        for (pos, &i) in order.iter().enumerate() {
            rank[i as usize] = pos as u32;
        }
        let mut classes: Vec<String> = rules.iter().map(|r| r.class.clone()).collect();
        classes.sort();
        classes.dedup();
        for r in &mut rules {
            r.class_idx = classes.binary_search(&r.class).expect("collected") as u32;
        }
        let meta = rules
            .iter()
            .enumerate()
            .map(|(i, r)| RuleMeta::new(r, rule_need[i], rank[i], has_deferred[i]))
            .collect();
        RuleSet {
            source: source.to_string(),
            fingerprint: blake3::hash(text.as_bytes()).to_hex()[..16].to_string(),
            analyzer_fingerprint: analyzer.fingerprint().to_string(),
            fields: fields.to_vec(),
            rules,
            meta,
            conds,
            items,
            index,
            postings,
            posting_items,
            regex_set,
            regexes,
            regex_conds,
            deferred,
            rank,
            by_rank: order,
            classes,
            classes_id: super::ruleset::next_classes_id(),
        }
    }
}

fn class_token_name(word: &str) -> Option<&str> {
    let inner = word.strip_prefix('<')?.strip_suffix('>')?;
    (!inner.is_empty() && inner.chars().all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_'))
        .then_some(inner)
}

/// A class token is known if a built-in family that is switched on, or a user pattern, produces it.
fn check_class_token(name: &str, s: &AnalyzerSettings) -> Result<(), String> {
    if s.patterns.iter().any(|p| p.name == name) {
        return Ok(());
    }
    let c = &s.collapse;
    let switch = match name {
        "num" => Some(("numbers", c.numbers)),
        "hex" | "code" => Some(("hex_ids", c.hex_ids)),
        "uuid" => Some(("uuids", c.uuids)),
        "ipv4" | "ipv6" => Some(("ip_addresses", c.ip_addresses)),
        "email" => Some(("emails", c.emails)),
        "url" => Some(("urls", c.urls)),
        "path" => Some(("paths", c.paths)),
        "ts" => Some(("timestamps", c.timestamps)),
        _ => None,
    };
    match switch {
        Some((_, true)) => Ok(()),
        Some((key, false)) => Err(format!("<{name}> never occurs: analyzer.collapse.{key} is off")),
        None => {
            let mut known: Vec<String> = crate::text::collapse::ALL_TOKENS.iter().map(|t| t.to_string()).collect();
            known.extend(s.patterns.iter().map(|p| format!("<{}>", p.name)));
            Err(format!("unknown class token <{name}>: known are {}", known.join(", ")))
        }
    }
}

fn one_line(s: &str) -> String {
    s.lines().map(str::trim).filter(|l| !l.is_empty()).collect::<Vec<_>>().join(" ")
}
