//! Term → row mapping: an interned vocabulary with a size bound, or feature hashing into a fixed number of buckets.
//!
//! - `interned`: the exact vocabulary, a shared base index plus a small delta, cheap to clone;
//! - `term_text`: its append-only term text in shared chunks.

pub mod interned;
pub mod term_text;

use crate::settings::{ModelSettings, VocabularyKind};

pub use interned::Interned;

/// Maps terms to model rows.
#[derive(Debug, Clone, PartialEq)]
pub enum Vocabulary {
    /// Exact terms, first-seen order, at most `max` of them.
    Interned(Interned),
    /// Terms hashed (FNV-1a 64, stable across processes) into `buckets` rows.
    Hashed { buckets: u32 },
}

impl Vocabulary {
    /// An empty vocabulary of the kind and bounds `[model]` names.
    pub fn from_settings(m: &ModelSettings) -> Vocabulary {
        Vocabulary::new(m.vocabulary, m.max_vocabulary, m.hash_buckets)
    }

    pub fn new(kind: VocabularyKind, max: usize, buckets: usize) -> Vocabulary {
        match kind {
            VocabularyKind::Interned => Vocabulary::Interned(Interned::new(max)),
            VocabularyKind::Hashed => Vocabulary::Hashed { buckets: buckets as u32 },
        }
    }

    pub fn kind(&self) -> VocabularyKind {
        match self {
            Vocabulary::Interned(_) => VocabularyKind::Interned,
            Vocabulary::Hashed { .. } => VocabularyKind::Hashed,
        }
    }

    /// Number of rows the model holds for this vocabulary.
    #[inline]
    pub fn rows(&self) -> usize {
        match self {
            Vocabulary::Interned(v) => v.len(),
            Vocabulary::Hashed { buckets } => *buckets as usize,
        }
    }

    /// The size bound: `max` terms, or the bucket count.
    pub fn capacity(&self) -> usize {
        match self {
            Vocabulary::Interned(v) => v.max(),
            Vocabulary::Hashed { buckets } => *buckets as usize,
        }
    }

    #[inline]
    pub fn lookup(&self, term: &str) -> Option<u32> {
        match self {
            Vocabulary::Interned(v) => v.lookup(term),
            Vocabulary::Hashed { buckets } => Some(bucket(term, *buckets)),
        }
    }

    /// The row of `term`, adding it if there is room; `None` when the interned vocabulary is full.
    #[inline]
    pub fn intern(&mut self, term: &str) -> Option<u32> {
        match self {
            Vocabulary::Interned(v) => v.intern(term),
            Vocabulary::Hashed { buckets } => Some(bucket(term, *buckets)),
        }
    }

    /// The term of a row (interned only).
    pub fn term(&self, id: u32) -> Option<&str> {
        match self {
            Vocabulary::Interned(v) => v.term(id),
            Vocabulary::Hashed { .. } => None,
        }
    }

    /// All terms in row order (interned only; empty for hashing).
    pub fn terms(&self) -> impl Iterator<Item = &str> + '_ {
        let interned = match self {
            Vocabulary::Interned(v) => Some(v),
            Vocabulary::Hashed { .. } => None,
        };
        interned.into_iter().flat_map(|v| v.terms())
    }

    /// Rebuild an interned vocabulary from its terms in row order.
    pub fn from_terms(terms: Vec<Box<str>>, max: usize) -> Result<Vocabulary, String> {
        Vocabulary::from_term_iter(terms, max)
    }

    /// `from_terms` for any sequence of strings (a snapshot's borrowed terms).
    pub fn from_term_iter<S: AsRef<str>>(terms: impl IntoIterator<Item = S>, max: usize) -> Result<Vocabulary, String> {
        Interned::from_terms(terms, max).map(Vocabulary::Interned)
    }
}

/// FNV-1a, 64-bit, reduced modulo `buckets`: stable, documented, and cheap on short terms.
#[inline]
pub fn bucket(term: &str, buckets: u32) -> u32 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in term.as_bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    (h % buckets as u64) as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interned_is_bounded_and_stable() {
        let mut v = Vocabulary::new(VocabularyKind::Interned, 2, 0);
        assert_eq!(v.intern("a"), Some(0));
        assert_eq!(v.intern("b"), Some(1));
        assert_eq!(v.intern("a"), Some(0));
        assert_eq!(v.intern("c"), None, "full vocabulary refuses new terms");
        assert_eq!(v.lookup("b"), Some(1));
        assert_eq!(v.lookup("c"), None);
        assert_eq!(v.rows(), 2);
        assert_eq!(v.term(1), Some("b"));
    }

    #[test]
    fn hashing_is_deterministic_and_in_range() {
        // FNV-1a 64 of "a" is 0xaf63dc4c8601ec8c (published test vector).
        assert_eq!(bucket("a", u32::MAX), (0xaf63dc4c8601ec8c_u64 % u32::MAX as u64) as u32);
        let v = Vocabulary::new(VocabularyKind::Hashed, 0, 1024);
        for t in ["refund", "timeout", "<num>"] {
            let b = v.lookup(t).unwrap();
            assert!(b < 1024);
            assert_eq!(v.lookup(t), Some(b));
        }
        assert_eq!(v.rows(), 1024);
    }

    #[test]
    fn from_terms_refuses_duplicates() {
        assert!(Vocabulary::from_terms(vec!["a".into(), "a".into()], 10).is_err());
        let v = Vocabulary::from_terms(vec!["a".into(), "b".into()], 10).unwrap();
        assert_eq!(v.lookup("b"), Some(1));
    }
}
