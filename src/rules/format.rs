//! The rules file as written: serde shapes of the TOML, with byte spans kept so validation can name lines.
//!
//! ```toml
//! [[rule]]
//! id = "refund-request"       # unique; letters, digits, '-', '_', '.'
//! class = "returns"           # the target class
//! action = "assign"           # "assign", "boost" (with log_odds) or "review"
//! priority = 10               # higher wins; default 0
//! guard = false               # a guard wins in every blend mode
//! note = "free text for people"
//!   [[rule.when]]             # every `when` block must hold
//!   field = "subject"         # optional: only this input field
//!   any = ["refund", "return label"]   # at least `at_least` (default 1) of these
//!   [[rule.when]]
//!   none = ["newsletter"]     # none of these
//! ```

use serde::Deserialize;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawFile {
    #[serde(default)]
    pub rule: Vec<Spanned<RawRule>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawRule {
    pub id: Spanned<String>,
    pub class: Spanned<String>,
    pub action: Spanned<String>,
    #[serde(default)]
    pub log_odds: Option<Spanned<f64>>,
    #[serde(default)]
    pub priority: Option<Spanned<i64>>,
    #[serde(default)]
    pub guard: Option<Spanned<bool>>,
    #[serde(default)]
    pub note: Option<Spanned<String>>,
    #[serde(default)]
    pub when: Vec<Spanned<RawWhen>>,
}

/// One `[[rule.when]]` block: each list or regex present is one condition, all scoped to `field`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawWhen {
    #[serde(default)]
    pub field: Option<Spanned<String>>,
    #[serde(default)]
    pub any: Option<Spanned<Vec<Spanned<String>>>>,
    #[serde(default)]
    pub all: Option<Spanned<Vec<Spanned<String>>>>,
    #[serde(default)]
    pub none: Option<Spanned<Vec<Spanned<String>>>>,
    #[serde(default)]
    pub regex: Option<Spanned<String>>,
    #[serde(default)]
    pub at_least: Option<Spanned<i64>>,
}

/// 1-based line of a byte offset.
pub(crate) fn line_of(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end].iter().filter(|&&b| b == b'\n').count() + 1
}

/// The id of the `[[rule]]` whose text holds `offset`, found by a plain scan of
/// the lines (it works on files that do not parse). `None` outside any rule or
/// when the rule has no readable id.
pub(crate) fn rule_id_at(text: &str, offset: usize) -> Option<String> {
    let mut start = None;
    let mut at = 0;
    for line in text.split_inclusive('\n') {
        if at > offset {
            break;
        }
        if line.trim_start().starts_with("[[rule]]") {
            start = Some(at);
        } else if is_other_top_header(line) {
            start = None;
        }
        at += line.len();
    }
    let from = start?;
    for line in text[from..].split_inclusive('\n').skip(1) {
        let t = line.trim_start();
        if t.starts_with("[[rule]]") || is_other_top_header(line) {
            return None;
        }
        if let Some(rest) = t.strip_prefix("id") {
            let rest = rest.trim_start();
            if let Some(v) = rest.strip_prefix('=') {
                let v = v.trim();
                let v = v.split('#').next().unwrap_or("").trim();
                let v = v.trim_matches(|c| c == '"' || c == '\'');
                if !v.is_empty() {
                    return Some(v.to_string());
                }
            }
        }
    }
    None
}

fn is_other_top_header(line: &str) -> bool {
    let t = line.trim_start();
    (t.starts_with('[') && !t.starts_with("[[rule")) && !t.starts_with("[rule.")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_and_rule_ids_by_offset() {
        let text = "# head\n[[rule]]\nid = \"a\"\nclass = \"x\"\n[[rule]]\n  id = 'b' # note\nclass = \"y\"\n";
        assert_eq!(line_of(text, 0), 1);
        assert_eq!(line_of(text, text.find("class = \"x\"").unwrap()), 4);
        assert_eq!(rule_id_at(text, 2), None, "the comment is outside any rule");
        assert_eq!(rule_id_at(text, text.find("class = \"x\"").unwrap()).as_deref(), Some("a"));
        assert_eq!(rule_id_at(text, text.find("class = \"y\"").unwrap()).as_deref(), Some("b"));
    }

    #[test]
    fn spans_survive_arrays_of_tables() {
        let text = "[[rule]]\nid = \"a\"\nclass = \"x\"\naction = \"assign\"\n  [[rule.when]]\n  any = [\"one\",\n  \"two\"]\n";
        let f: RawFile = toml::from_str(text).unwrap();
        let r = f.rule[0].get_ref();
        assert_eq!(line_of(text, r.id.span().start), 2);
        let any = r.when[0].get_ref().any.as_ref().unwrap().get_ref();
        assert_eq!(line_of(text, any[1].span().start), 7);
    }
}
