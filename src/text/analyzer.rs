//! The `Analyzer`: built once from analyzer settings, it turns a record's weighted fields into a `TermBag`; it also owns the settings fingerprint.

use serde_json::Value;

use super::bag::TermBag;
use super::patterns::UserPatterns;
use super::stopwords;
use super::tokenizer::{for_each_token, TokenConfig};
use crate::settings::AnalyzerSettings;

/// Bumped whenever tokenisation changes behaviour for the same settings, so
/// old models are refused instead of silently scoring different terms.
pub const ANALYZER_REVISION: u32 = 1;

#[derive(Debug, Clone)]
pub struct Analyzer {
    settings: AnalyzerSettings,
    tokens: TokenConfig,
    patterns: Option<UserPatterns>,
    fingerprint: String,
}

/// Reusable buffers, one per worker thread, so analysis allocates nothing per term.
#[derive(Debug, Default)]
pub struct AnalyzerScratch {
    lower: String,
    prev: String,
    bigram: String,
    spans: Vec<(usize, usize, usize)>,
}

impl Analyzer {
    /// Settings are validated already; this only compiles the user patterns.
    pub fn new(settings: &AnalyzerSettings) -> Result<Analyzer, regex::Error> {
        let patterns = UserPatterns::new(&settings.patterns)?;
        let tokens = TokenConfig {
            collapse: settings.collapse,
            lowercase: settings.lowercase,
            min_len: settings.min_token_len,
            max_len: settings.max_token_len,
            stop_words: settings.stop_words.then(stopwords::english),
        };
        Ok(Analyzer { settings: settings.clone(), tokens, patterns, fingerprint: fingerprint(settings) })
    }

    pub fn settings(&self) -> &AnalyzerSettings {
        &self.settings
    }

    /// A stable hash of the analyzer settings and revision.
    pub fn fingerprint(&self) -> &str {
        &self.fingerprint
    }

    /// Add the terms of one field, each with `weight`, to `bag`.
    pub fn analyze_field(&self, text: &str, weight: f64, scratch: &mut AnalyzerScratch, bag: &mut TermBag) {
        let AnalyzerScratch { lower, prev, bigram, spans } = scratch;
        prev.clear();
        let bigrams = self.settings.bigrams;
        let mut emit = |tok: &str| {
            bag.push(tok, weight);
            if bigrams {
                if !prev.is_empty() {
                    bigram.clear();
                    bigram.push_str(prev);
                    bigram.push(' ');
                    bigram.push_str(tok);
                    bag.push(bigram, weight);
                }
                prev.clear();
                prev.push_str(tok);
            }
        };
        match &self.patterns {
            None => for_each_token(text, &self.tokens, lower, &mut emit),
            Some(p) => {
                let mut found = Vec::new();
                p.spans(text, &mut found);
                if found.is_empty() {
                    for_each_token(text, &self.tokens, lower, &mut emit);
                    return;
                }
                spans.clear();
                let mut at = 0;
                for (s, e, tok) in found {
                    for_each_token(&text[at..s], &self.tokens, lower, &mut emit);
                    emit(tok);
                    at = e;
                }
                for_each_token(&text[at..], &self.tokens, lower, &mut emit);
            }
        }
    }

    /// Analyze every (text, weight) field of a record into `bag` (cleared first).
    pub fn analyze_fields<'a>(
        &self,
        fields: impl IntoIterator<Item = (&'a str, f64)>,
        scratch: &mut AnalyzerScratch,
        bag: &mut TermBag,
    ) {
        bag.clear();
        for (text, w) in fields {
            self.analyze_field(text, w, scratch, bag);
        }
    }

    /// Convenience for tests and tools: the tokens of one text, weight 1.
    pub fn tokens(&self, text: &str) -> Vec<String> {
        let mut bag = TermBag::new();
        self.analyze_field(text, 1.0, &mut AnalyzerScratch::default(), &mut bag);
        bag.iter().map(|(t, _)| t.to_string()).collect()
    }
}

/// The fingerprint of a set of analyzer settings: blake3 over the revision
/// and the canonical JSON of the settings, first 16 hex digits.
pub fn fingerprint(settings: &AnalyzerSettings) -> String {
    let json = serde_json::to_string(settings).expect("settings serialize");
    let mut h = blake3::Hasher::new();
    h.update(format!("sieveline-analyzer-r{ANALYZER_REVISION}\n").as_bytes());
    h.update(json.as_bytes());
    h.finalize().to_hex()[..16].to_string()
}

/// The dotted names of settings that differ, with both values, for refusal messages.
pub fn differences(model: &AnalyzerSettings, current: &AnalyzerSettings) -> Vec<String> {
    let a = serde_json::to_value(model).expect("serialize");
    let b = serde_json::to_value(current).expect("serialize");
    let mut out = Vec::new();
    diff("analyzer", &a, &b, &mut out);
    out
}

fn diff(path: &str, a: &Value, b: &Value, out: &mut Vec<String>) {
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                let p = format!("{path}.{k}");
                match (x.get(k), y.get(k)) {
                    (Some(va), Some(vb)) => diff(&p, va, vb, out),
                    (va, vb) => out.push(format!("{p} (model {}, current {})", show(va), show(vb))),
                }
            }
        }
        _ if a != b => out.push(format!("{path} (model {a}, current {b})")),
        _ => {}
    }
}

fn show(v: Option<&Value>) -> String {
    v.map(|v| v.to_string()).unwrap_or_else(|| "unset".into())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::{PatternSetting, Settings};

    fn default_analyzer() -> Analyzer {
        Analyzer::new(&Settings::defaults().analyzer).unwrap()
    }

    #[test]
    fn collapses_the_order_example_with_a_user_pattern() {
        // The example from the core issue: an order number, an address and a timestamp.
        let mut s = Settings::defaults().analyzer;
        s.patterns.push(PatternSetting { name: "order_no".into(), regex: r"\b\d{4}-[A-Z]{2}\b".into() });
        let a = Analyzer::new(&s).unwrap();
        assert_eq!(
            a.tokens("order 4711-AB from 10.0.0.12 at 2026-01-05T10:00:00Z"),
            ["order", "<order_no>", "from", "<ipv4>", "at", "<ts>"]
        );
    }

    #[test]
    fn collapses_the_order_example_with_defaults() {
        let a = default_analyzer();
        assert_eq!(
            a.tokens("order 4711-AB from 10.0.0.12 at 2026-01-05T10:00:00Z"),
            ["order", "<num>", "ab", "from", "<ipv4>", "at", "<ts>"]
        );
    }

    #[test]
    fn every_family_switched_off_keeps_raw_pieces() {
        let mut s = Settings::defaults().analyzer;
        s.collapse = crate::settings::CollapseSettings::all(false);
        let a = Analyzer::new(&s).unwrap();
        assert_eq!(a.tokens("from 10.0.0.12"), ["from", "10", "0", "0", "12"].map(|t| t.to_string()).into_iter().filter(|t| t.len() >= 2).collect::<Vec<_>>());
    }

    #[test]
    fn subject_weight_two_counts_each_subject_term_twice() {
        // Common practice: up-weighting title words.
        let a = default_analyzer();
        let mut bag = TermBag::new();
        a.analyze_fields([("Refund late", 2.0), ("refund please", 1.0)], &mut AnalyzerScratch::default(), &mut bag);
        let agg = bag.aggregated();
        assert_eq!(agg, vec![("late".into(), 2.0), ("please".into(), 1.0), ("refund".into(), 3.0)]);
    }

    #[test]
    fn bigrams_stay_within_a_field() {
        let mut s = Settings::defaults().analyzer;
        s.bigrams = true;
        let a = Analyzer::new(&s).unwrap();
        let mut bag = TermBag::new();
        a.analyze_fields([("return label", 1.0), ("lost parcel", 1.0)], &mut AnalyzerScratch::default(), &mut bag);
        let terms: Vec<&str> = bag.iter().map(|(t, _)| t).collect();
        assert_eq!(terms, ["return", "label", "return label", "lost", "parcel", "lost parcel"]);
    }

    #[test]
    fn fingerprint_is_stable_and_sensitive() {
        let s = Settings::defaults().analyzer;
        assert_eq!(fingerprint(&s), fingerprint(&s.clone()));
        let mut t = s.clone();
        t.bigrams = !t.bigrams;
        assert_ne!(fingerprint(&s), fingerprint(&t));
        let d = differences(&s, &t);
        assert_eq!(d.len(), 1);
        assert!(d[0].starts_with("analyzer.bigrams"), "{d:?}");
        t.bigrams = s.bigrams;
        t.collapse.urls = false;
        assert!(differences(&s, &t)[0].starts_with("analyzer.collapse.urls"));
    }
}
