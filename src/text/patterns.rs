//! User-defined collapsing patterns: named regexes whose matches become `<name>` tokens, tried before the built-in families.

use regex::{Regex, RegexSet};

use crate::settings::PatternSetting;

#[derive(Debug, Clone)]
pub struct UserPatterns {
    set: RegexSet,
    regexes: Vec<Regex>,
    tokens: Vec<String>,
}

impl UserPatterns {
    pub fn new(patterns: &[PatternSetting]) -> Result<Option<UserPatterns>, regex::Error> {
        if patterns.is_empty() {
            return Ok(None);
        }
        let set = RegexSet::new(patterns.iter().map(|p| p.regex.as_str()))?;
        let regexes = patterns.iter().map(|p| Regex::new(&p.regex)).collect::<Result<Vec<_>, _>>()?;
        let tokens = patterns.iter().map(|p| format!("<{}>", p.name)).collect();
        Ok(Some(UserPatterns { set, regexes, tokens }))
    }

    /// Non-overlapping matches in `text`, sorted by start: (start, end, token).
    /// Where matches overlap, the earlier start wins, then the longer match,
    /// then the pattern listed first.
    pub fn spans<'a>(&'a self, text: &str, out: &mut Vec<(usize, usize, &'a str)>) {
        out.clear();
        let hits = self.set.matches(text);
        if !hits.matched_any() {
            return;
        }
        for i in hits.iter() {
            for m in self.regexes[i].find_iter(text) {
                if m.start() < m.end() {
                    out.push((m.start(), m.end(), self.tokens[i].as_str()));
                }
            }
        }
        out.sort_by(|a, b| a.0.cmp(&b.0).then(b.1.cmp(&a.1)));
        let mut end = 0;
        out.retain(|&(s, e, _)| {
            if s >= end {
                end = e;
                true
            } else {
                false
            }
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pats(list: &[(&str, &str)]) -> UserPatterns {
        let v: Vec<PatternSetting> =
            list.iter().map(|(n, r)| PatternSetting { name: n.to_string(), regex: r.to_string() }).collect();
        UserPatterns::new(&v).unwrap().unwrap()
    }

    #[test]
    fn finds_non_overlapping_spans() {
        let p = pats(&[("order_no", r"\b\d{4}-[A-Z]{2}\b"), ("part", r"\bP-\d+\b")]);
        let mut out = Vec::new();
        p.spans("order 4711-AB and P-22 and 1234-CD", &mut out);
        let got: Vec<(&str, &str)> = out.iter().map(|&(s, e, t)| (&"order 4711-AB and P-22 and 1234-CD"[s..e], t)).collect();
        assert_eq!(got, vec![("4711-AB", "<order_no>"), ("P-22", "<part>"), ("1234-CD", "<order_no>")]);
    }

    #[test]
    fn overlap_keeps_the_earlier_longer_match() {
        let p = pats(&[("a", r"ab"), ("b", r"abc"), ("c", r"bcd")]);
        let mut out = Vec::new();
        p.spans("abcd", &mut out);
        assert_eq!(out, vec![(0, 3, "<b>")]);
    }

    #[test]
    fn no_patterns_is_none() {
        assert!(UserPatterns::new(&[]).unwrap().is_none());
    }
}
