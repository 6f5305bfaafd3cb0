//! Why rules fired: a slow, plain re-check of every condition of every rule on one record, naming the terms and regex matches found and the fields they were in.
//!
//! It shares no code with the hot-path matcher on purpose, so tests can check
//! that both agree on which rules fire.

use serde::Serialize;

use super::record::{FieldText, RecordTerms};
use super::ruleset::{CondKind, RuleSet};

/// One condition of a rule, checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CondTrace {
    pub kind: &'static str,
    /// The field the condition is scoped to, or `None` for every field.
    pub field: Option<String>,
    pub line: usize,
    /// Hits needed (`any`, `regex`), items needed (`all`), 0 for `none`.
    pub needs: u32,
    /// What was found: `term @ field` for terms, the matched text for regexes.
    pub found: Vec<String>,
    /// Listed terms that were not found (for `all` and `none` this is what decides).
    pub missing: Vec<String>,
    pub holds: bool,
}

/// One rule, checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RuleTrace {
    pub id: String,
    pub class: String,
    pub action: &'static str,
    pub log_odds: Option<f64>,
    pub priority: i32,
    pub guard: bool,
    pub line: usize,
    pub fired: bool,
    pub conditions: Vec<CondTrace>,
}

impl RuleSet {
    /// Every rule checked against the record, in precedence order. Rules none of
    /// whose positive conditions found anything are left out unless `all` is set.
    pub fn explain(&self, terms: &RecordTerms, texts: &[FieldText<'_>], all: bool) -> Vec<RuleTrace> {
        let mut out = Vec::new();
        let mut order: Vec<u32> = (0..self.rules.len() as u32).collect();
        order.sort_by_key(|&r| self.rank[r as usize]);
        for r in order {
            let rule = &self.rules[r as usize];
            let mut conds = Vec::new();
            for c in self.conditions(r) {
                let field_name = c.field.map(|f| self.fields[f].clone());
                let in_scope = |f: usize| c.field.is_none_or(|x| x == f);
                let mut found = Vec::new();
                let mut missing = Vec::new();
                let mut hits = 0u32;
                match c.kind {
                    CondKind::Regex => {
                        let re = self.regex(c).expect("regex condition");
                        for t in texts.iter().filter(|t| in_scope(t.field)) {
                            for m in re.find_iter(t.text) {
                                hits += 1;
                                found.push(format!("{:?} @ {}", m.as_str(), self.field_label(t.field)));
                            }
                        }
                    }
                    _ => {
                        for item in self.items(c) {
                            let mut at = None;
                            for span in terms.spans.iter().filter(|s| in_scope(s.field)) {
                                let words: Vec<&str> = terms.words(span).collect();
                                let n = item.tokens.len();
                                if words.windows(n).any(|w| w.iter().zip(&item.tokens).all(|(a, b)| *a == &**b)) {
                                    at = Some(span.field);
                                    break;
                                }
                            }
                            match at {
                                Some(f) => {
                                    hits += 1;
                                    found.push(format!("{} @ {}", item.tokens.join(" "), self.field_label(f)));
                                }
                                None => missing.push(item.text.clone()),
                            }
                        }
                    }
                }
                let holds = match c.kind {
                    CondKind::None => hits == 0,
                    _ => hits >= c.at_least,
                };
                conds.push(CondTrace {
                    kind: c.kind.name(),
                    field: field_name,
                    line: c.line,
                    needs: c.at_least,
                    found,
                    missing,
                    holds,
                });
            }
            let fired = conds.iter().all(|c| c.holds);
            let touched = conds.iter().any(|c| c.kind != "none" && !c.found.is_empty());
            if fired || touched || all {
                out.push(RuleTrace {
                    id: rule.id.clone(),
                    class: rule.class.clone(),
                    action: rule.action.name(),
                    log_odds: match rule.action {
                        super::Action::Boost(x) => Some(x),
                        _ => None,
                    },
                    priority: rule.priority,
                    guard: rule.guard,
                    line: rule.line,
                    fired,
                    conditions: conds,
                });
            }
        }
        out
    }

    fn field_label(&self, f: usize) -> String {
        self.fields.get(f).cloned().unwrap_or_else(|| format!("field {f}"))
    }
}

/// A one-line reading of a rule trace for people: `fired stolen-card (assign lost_or_stolen_card): any[stolen @ text] ...`.
pub fn describe(t: &RuleTrace) -> String {
    let head = format!(
        "{} {} ({}{} {}, priority {}{}), line {}",
        if t.fired { "FIRED" } else { "no   " },
        t.id,
        t.action,
        t.log_odds.map(|x| format!(" {x:+}")).unwrap_or_default(),
        t.class,
        t.priority,
        if t.guard { ", guard" } else { "" },
        t.line
    );
    let mut parts = vec![head];
    for c in &t.conditions {
        let scope = c.field.as_deref().map(|f| format!(" in {f}")).unwrap_or_default();
        let mark = if c.holds { "ok " } else { "NO " };
        let detail = match c.kind {
            "none" if c.found.is_empty() => "none of the terms found".to_string(),
            "none" => format!("found {}", c.found.join(", ")),
            "all" if c.holds => format!("found all: {}", c.found.join(", ")),
            "all" => format!("missing {}", c.missing.join(", ")),
            _ if c.found.is_empty() => format!("nothing found (needs {})", c.needs),
            _ => format!("found {} of {} needed: {}", c.found.len(), c.needs, c.found.join(", ")),
        };
        parts.push(format!("    {mark}{}{scope} (line {}): {detail}", c.kind, c.line));
    }
    parts.join("\n")
}
