//! Term → row mapping: an interned vocabulary with a size bound, or feature hashing into a fixed number of buckets.

use rustc_hash::FxHashMap;

use crate::settings::VocabularyKind;

/// Maps terms to model rows.
#[derive(Debug, Clone, PartialEq)]
pub enum Vocabulary {
    /// Exact terms, first-seen order, at most `max` of them.
    Interned { map: FxHashMap<Box<str>, u32>, terms: Vec<Box<str>>, max: usize },
    /// Terms hashed (FNV-1a 64, stable across processes) into `buckets` rows.
    Hashed { buckets: u32 },
}

impl Vocabulary {
    pub fn new(kind: VocabularyKind, max: usize, buckets: usize) -> Vocabulary {
        match kind {
            VocabularyKind::Interned => Vocabulary::Interned { map: FxHashMap::default(), terms: Vec::new(), max },
            VocabularyKind::Hashed => Vocabulary::Hashed { buckets: buckets as u32 },
        }
    }

    pub fn kind(&self) -> VocabularyKind {
        match self {
            Vocabulary::Interned { .. } => VocabularyKind::Interned,
            Vocabulary::Hashed { .. } => VocabularyKind::Hashed,
        }
    }

    /// Number of rows the model holds for this vocabulary.
    pub fn rows(&self) -> usize {
        match self {
            Vocabulary::Interned { terms, .. } => terms.len(),
            Vocabulary::Hashed { buckets } => *buckets as usize,
        }
    }

    /// The size bound: `max` terms, or the bucket count.
    pub fn capacity(&self) -> usize {
        match self {
            Vocabulary::Interned { max, .. } => *max,
            Vocabulary::Hashed { buckets } => *buckets as usize,
        }
    }

    #[inline]
    pub fn lookup(&self, term: &str) -> Option<u32> {
        match self {
            Vocabulary::Interned { map, .. } => map.get(term).copied(),
            Vocabulary::Hashed { buckets } => Some(bucket(term, *buckets)),
        }
    }

    /// The row of `term`, adding it if there is room; `None` when the interned vocabulary is full.
    #[inline]
    pub fn intern(&mut self, term: &str) -> Option<u32> {
        match self {
            Vocabulary::Interned { map, terms, max } => {
                if let Some(&id) = map.get(term) {
                    return Some(id);
                }
                if terms.len() >= *max {
                    return None;
                }
                let id = terms.len() as u32;
                let boxed: Box<str> = term.into();
                terms.push(boxed.clone());
                map.insert(boxed, id);
                Some(id)
            }
            Vocabulary::Hashed { buckets } => Some(bucket(term, *buckets)),
        }
    }

    /// The term of a row (interned only).
    pub fn term(&self, id: u32) -> Option<&str> {
        match self {
            Vocabulary::Interned { terms, .. } => terms.get(id as usize).map(|t| &**t),
            Vocabulary::Hashed { .. } => None,
        }
    }

    /// All terms in row order (interned only; empty for hashing).
    pub fn terms(&self) -> &[Box<str>] {
        match self {
            Vocabulary::Interned { terms, .. } => terms,
            Vocabulary::Hashed { .. } => &[],
        }
    }

    /// Rebuild an interned vocabulary from its terms in row order.
    pub fn from_terms(terms: Vec<Box<str>>, max: usize) -> Result<Vocabulary, String> {
        let mut map = FxHashMap::default();
        map.reserve(terms.len());
        for (i, t) in terms.iter().enumerate() {
            if map.insert(t.clone(), i as u32).is_some() {
                return Err(format!("term {t:?} appears twice"));
            }
        }
        Ok(Vocabulary::Interned { map, terms, max: max.max(0) })
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
