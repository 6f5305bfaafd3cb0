//! `TermBag`: the weighted terms of one record, stored in one reusable arena instead of a `String` per term.

use serde::{Deserialize, Serialize};

/// Weighted terms, in the order the analyzer produced them. Duplicates are
/// kept as separate entries; everything downstream is linear in them.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct TermBag {
    arena: String,
    entries: Vec<(u32, u32, f64)>,
}

impl TermBag {
    pub fn new() -> Self {
        Self::default()
    }

    pub fn clear(&mut self) {
        self.arena.clear();
        self.entries.clear();
    }

    #[inline]
    pub fn push(&mut self, term: &str, weight: f64) {
        let start = self.arena.len() as u32;
        self.arena.push_str(term);
        self.entries.push((start, self.arena.len() as u32, weight));
    }

    pub fn len(&self) -> usize {
        self.entries.len()
    }

    pub fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }

    #[inline]
    pub fn get(&self, i: usize) -> (&str, f64) {
        let (s, e, w) = self.entries[i];
        (&self.arena[s as usize..e as usize], w)
    }

    pub fn iter(&self) -> impl Iterator<Item = (&str, f64)> + '_ {
        self.entries.iter().map(move |&(s, e, w)| (&self.arena[s as usize..e as usize], w))
    }

    /// Sum of all term weights.
    pub fn total_weight(&self) -> f64 {
        self.entries.iter().map(|e| e.2).sum()
    }

    /// Terms merged by equal string, weights summed, sorted by term: the
    /// canonical form used in label events and count dumps.
    pub fn aggregated(&self) -> Vec<(String, f64)> {
        let mut v: Vec<(&str, f64)> = self.iter().collect();
        v.sort_by(|a, b| a.0.cmp(b.0));
        let mut out: Vec<(String, f64)> = Vec::with_capacity(v.len());
        for (t, w) in v {
            match out.last_mut() {
                Some(last) if last.0 == t => last.1 += w,
                _ => out.push((t.to_string(), w)),
            }
        }
        out
    }

    /// Build a bag from already analyzed (term, weight) pairs.
    pub fn from_pairs<'a>(pairs: impl IntoIterator<Item = (&'a str, f64)>) -> Self {
        let mut b = TermBag::new();
        for (t, w) in pairs {
            b.push(t, w);
        }
        b
    }
}

/// The serialisable form of analyzed features: `[["term", weight], ...]`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FeatureList(pub Vec<(String, f64)>);

impl From<&TermBag> for FeatureList {
    fn from(b: &TermBag) -> Self {
        FeatureList(b.aggregated())
    }
}

impl FeatureList {
    pub fn to_bag(&self) -> TermBag {
        TermBag::from_pairs(self.0.iter().map(|(t, w)| (t.as_str(), *w)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn push_get_and_aggregate() {
        let mut b = TermBag::new();
        b.push("refund", 2.0);
        b.push("label", 1.0);
        b.push("refund", 1.0);
        assert_eq!(b.len(), 3);
        assert_eq!(b.get(1), ("label", 1.0));
        assert_eq!(b.total_weight(), 4.0);
        assert_eq!(b.aggregated(), vec![("label".to_string(), 1.0), ("refund".to_string(), 3.0)]);
        b.clear();
        assert!(b.is_empty());
    }

    #[test]
    fn feature_list_round_trip() {
        let b = TermBag::from_pairs([("a", 1.0), ("b", 0.5)]);
        let f = FeatureList::from(&b);
        let json = serde_json::to_string(&f).unwrap();
        assert_eq!(json, r#"[["a",1.0],["b",0.5]]"#);
        let back: FeatureList = serde_json::from_str(&json).unwrap();
        assert_eq!(back.to_bag().aggregated(), b.aggregated());
    }
}
