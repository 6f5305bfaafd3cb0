//! A record as rules and model see it: one `TermBag` over all fields, the share of it each field produced, and the raw field texts for regexes.

use crate::text::{Analyzer, AnalyzerScratch, TermBag};

/// One text field of a record: its index in `input.fields`, its text and its weight.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FieldText<'a> {
    pub field: usize,
    pub text: &'a str,
    pub weight: f64,
}

/// The entries of the bag that one field produced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FieldSpan {
    pub field: usize,
    pub start: usize,
    pub end: usize,
}

/// Analyzed terms of one record, reused across records.
#[derive(Debug, Default, Clone)]
pub struct RecordTerms {
    /// Every field's weighted terms, in field order: what the model scores.
    pub bag: TermBag,
    pub spans: Vec<FieldSpan>,
    /// Set by `analyze` when the analyzer makes no bigrams: every entry of the
    /// bag is then one word, and the matcher need not look for spaces.
    /// False (look) for bags filled by hand.
    pub(crate) words_only: bool,
}

impl RecordTerms {
    pub fn new() -> Self {
        Self::default()
    }

    /// Analyze each field on its own into the shared bag, remembering where each
    /// field's terms are. The bag equals `Analyzer::analyze_fields` over the same fields.
    pub fn analyze(&mut self, analyzer: &Analyzer, fields: &[FieldText<'_>], scratch: &mut AnalyzerScratch) {
        self.bag.clear();
        self.spans.clear();
        self.words_only = !analyzer.settings().bigrams;
        for f in fields {
            let start = self.bag.len();
            analyzer.analyze_field(f.text, f.weight, scratch, &mut self.bag);
            self.spans.push(FieldSpan { field: f.field, start, end: self.bag.len() });
        }
    }

    /// The single-word terms of a span, in order (bigrams, which hold a space, are skipped).
    pub fn words(&self, span: &FieldSpan) -> impl Iterator<Item = &str> + '_ {
        (span.start..span.end).map(|i| self.bag.get(i).0).filter(|t| !t.contains(' '))
    }
}

/// Fields of an offline row: `(index in input.fields, text, weight)` triples as `FieldText`.
pub fn field_texts<'a>(slots: &[usize], fields: &'a [(String, f64)]) -> Vec<FieldText<'a>> {
    fields.iter().zip(slots).map(|((t, w), &f)| FieldText { field: f, text: t.as_str(), weight: *w }).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::Settings;

    #[test]
    fn bag_is_the_same_as_analyzing_all_fields_at_once_and_spans_split_it() {
        let mut s = Settings::defaults().analyzer;
        s.bigrams = true;
        let a = Analyzer::new(&s).unwrap();
        let fields = [
            FieldText { field: 0, text: "Refund late", weight: 2.0 },
            FieldText { field: 1, text: "return label please", weight: 1.0 },
        ];
        let mut rt = RecordTerms::new();
        let mut sc = AnalyzerScratch::default();
        rt.analyze(&a, &fields, &mut sc);
        let mut whole = TermBag::new();
        a.analyze_fields(fields.iter().map(|f| (f.text, f.weight)), &mut sc, &mut whole);
        assert_eq!(rt.bag, whole);
        assert_eq!(rt.spans.len(), 2);
        assert_eq!(rt.words(&rt.spans[0]).collect::<Vec<_>>(), ["refund", "late"]);
        assert_eq!(rt.words(&rt.spans[1]).collect::<Vec<_>>(), ["return", "label", "please"]);
    }
}
