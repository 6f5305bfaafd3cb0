//! The interned vocabulary: a shared, immutable hash index of terms (the base) plus a small index of the terms added since the last compaction (the delta), over chunked term text; cheap to clone.
//!
//! Both indexes hold plain `Copy` slots (hash, id, where the text is, and the
//! term's first `HEAD` bytes), never strings, so cloning the vocabulary copies one
//! pointer for the base, one per text chunk, and the delta slots. A lookup hashes
//! the term once and probes the base; only a term the base lacks also probes the
//! delta (skipped when it is empty). A term of up to 12 bytes is compared
//! inside the slot, without reading the term text.
//! New terms go to the delta. When the delta reaches
//! `max(DELTA_MIN, base / DELTA_FRACTION)` slots it is folded into a new base:
//! in place when no clone shares the base, otherwise by building a new one. The
//! geometric bound keeps compaction amortised O(1) per new term and the delta at
//! most 1/16 of the base. Compaction happens only inside `intern`, which only the
//! owner of a working model calls; scorers read published clones and never intern.

use std::hash::BuildHasher;
use std::sync::Arc;

use hashbrown::HashTable;
use rustc_hash::FxBuildHasher;

use super::term_text::TermText;

/// The delta is folded into the base once it holds this many slots…
pub const DELTA_MIN: usize = 1024;
/// …or, for a larger base, this fraction of the base.
pub const DELTA_FRACTION: usize = 16;

/// Terms up to this many bytes are compared in the slot alone.
const INLINE: usize = 12;

#[derive(Clone, Copy)]
struct Slot {
    hash: u64,
    /// Some of the term's bytes (see `sample`): all of them for a term of up to 12 bytes.
    sample: u64,
    tail: u32,
    id: u32,
    /// Where the term starts in its text chunk, and its length in bytes.
    start: u32,
    len: u32,
}

/// Bytes of `b` in two words, read with fixed-size loads: the first 8 and last 4
/// (8 to 12 bytes and longer), the first 4 and last 4 (4 to 7), or the first,
/// middle and last (1 to 3). For a length of up to 12 bytes they cover every byte,
/// so equal lengths and equal samples mean equal terms.
#[inline]
fn sample(b: &[u8]) -> (u64, u32) {
    let n = b.len();
    let word4 = |at: usize| u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]]);
    if n >= 8 {
        let first = u64::from_le_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]);
        (first, word4(n - 4))
    } else if n >= 4 {
        (word4(0) as u64, word4(n - 4))
    } else if n > 0 {
        (b[0] as u64 | (b[n / 2] as u64) << 8 | (b[n - 1] as u64) << 16, 0)
    } else {
        (0, 0)
    }
}

/// What a probe compares slots against, computed once per lookup.
struct Key<'a> {
    term: &'a str,
    hash: u64,
    sample: u64,
    tail: u32,
}

impl<'a> Key<'a> {
    #[inline]
    fn new(term: &'a str) -> Key<'a> {
        let (sample, tail) = sample(term.as_bytes());
        Key { term, hash: FxBuildHasher.hash_one(term), sample, tail }
    }

    #[inline]
    fn slot(&self, id: u32, start: u32) -> Slot {
        Slot { hash: self.hash, sample: self.sample, tail: self.tail, id, start, len: self.term.len() as u32 }
    }

    #[inline]
    fn matches(&self, text: &TermText, s: &Slot) -> bool {
        s.hash == self.hash
            && s.len as usize == self.term.len()
            && s.sample == self.sample
            && s.tail == self.tail
            && (self.term.len() <= INLINE || text.bytes_at(s.id, s.start, s.len) == self.term.as_bytes())
    }
}

/// Exact terms in first-seen order, at most `max` of them.
#[derive(Clone)]
pub struct Interned {
    text: TermText,
    base: Arc<HashTable<Slot>>,
    delta: HashTable<Slot>,
    max: usize,
    compactions: u64,
}

impl Interned {
    pub fn new(max: usize) -> Interned {
        Interned { text: TermText::default(), base: Arc::new(HashTable::new()), delta: HashTable::new(), max, compactions: 0 }
    }

    /// Rebuild from terms in row order; refuses a duplicate.
    pub fn from_terms<S: AsRef<str>>(terms: impl IntoIterator<Item = S>, max: usize) -> Result<Interned, String> {
        let terms = terms.into_iter();
        let mut text = TermText::default();
        let mut base: HashTable<Slot> = HashTable::with_capacity(terms.size_hint().0);
        for t in terms {
            let t = t.as_ref();
            let key = Key::new(t);
            if base.find(key.hash, |s| key.matches(&text, s)).is_some() {
                return Err(format!("term {t:?} appears twice"));
            }
            let (id, start) = text.push(t).ok_or_else(|| format!("term of {} bytes is too long", t.len()))?;
            base.insert_unique(key.hash, key.slot(id, start), |s| s.hash);
        }
        Ok(Interned { text, base: Arc::new(base), delta: HashTable::new(), max, compactions: 0 })
    }

    pub fn len(&self) -> usize {
        self.text.len()
    }

    pub fn is_empty(&self) -> bool {
        self.text.is_empty()
    }

    pub fn max(&self) -> usize {
        self.max
    }

    #[inline]
    pub fn lookup(&self, term: &str) -> Option<u32> {
        self.find(&Key::new(term))
    }

    #[inline]
    fn find(&self, key: &Key<'_>) -> Option<u32> {
        if let Some(s) = self.base.find(key.hash, |s| key.matches(&self.text, s)) {
            return Some(s.id);
        }
        if self.delta.is_empty() {
            return None;
        }
        self.delta.find(key.hash, |s| key.matches(&self.text, s)).map(|s| s.id)
    }

    /// The id of `term`, adding it if there is room; `None` when full (or for a
    /// term too long to store, see `TermText::push`).
    pub fn intern(&mut self, term: &str) -> Option<u32> {
        let key = Key::new(term);
        if let Some(id) = self.find(&key) {
            return Some(id);
        }
        if self.text.len() >= self.max {
            return None;
        }
        let (id, start) = self.text.push(term)?;
        self.delta.insert_unique(key.hash, key.slot(id, start), |s| s.hash);
        if self.delta.len() >= DELTA_MIN.max(self.base.len() / DELTA_FRACTION) {
            self.compact();
        }
        Some(id)
    }

    /// Fold the delta into the base.
    fn compact(&mut self) {
        let delta = std::mem::take(&mut self.delta);
        match Arc::get_mut(&mut self.base) {
            Some(base) => {
                base.reserve(delta.len(), |s| s.hash);
                for s in delta {
                    base.insert_unique(s.hash, s, |s| s.hash);
                }
            }
            None => {
                let mut base = HashTable::with_capacity(self.base.len() + delta.len());
                for s in self.base.iter().copied().chain(delta) {
                    base.insert_unique(s.hash, s, |s| s.hash);
                }
                self.base = Arc::new(base);
            }
        }
        self.compactions += 1;
    }

    #[inline]
    pub fn term(&self, id: u32) -> Option<&str> {
        ((id as usize) < self.text.len()).then(|| self.text.get(id))
    }

    pub fn terms(&self) -> impl Iterator<Item = &str> + '_ {
        self.text.iter()
    }

    /// Terms added since the last compaction.
    pub fn delta_len(&self) -> usize {
        self.delta.len()
    }

    /// How many times the delta was folded into the base.
    pub fn compactions(&self) -> u64 {
        self.compactions
    }

    /// Whether `other` shares this base index, and how many text chunks it shares (of ours).
    pub fn sharing(&self, other: &Interned) -> (bool, (usize, usize)) {
        (Arc::ptr_eq(&self.base, &other.base), self.text.sharing(&other.text))
    }
}

impl PartialEq for Interned {
    fn eq(&self, other: &Interned) -> bool {
        self.max == other.max && self.len() == other.len() && self.terms().eq(other.terms())
    }
}

impl std::fmt::Debug for Interned {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Interned")
            .field("terms", &self.len())
            .field("delta", &self.delta.len())
            .field("max", &self.max)
            .finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_stay_stable_through_compactions_and_clones() {
        let mut v = Interned::new(1_000_000);
        let mut clones = Vec::new();
        for i in 0..20_000u32 {
            assert_eq!(v.intern(&format!("term{i}")), Some(i));
            if i % 3_000 == 0 {
                clones.push((i, v.clone()));
            }
        }
        assert!(v.compactions() >= 2, "{} compactions", v.compactions());
        assert!(v.delta_len() < DELTA_MIN.max(v.len() / DELTA_FRACTION));
        for i in 0..20_000u32 {
            let t = format!("term{i}");
            assert_eq!(v.lookup(&t), Some(i));
            assert_eq!(v.intern(&t), Some(i), "interning a known term adds nothing");
            assert_eq!(v.term(i), Some(t.as_str()));
        }
        assert_eq!(v.len(), 20_000);
        assert_eq!(v.lookup("term20000"), None);
        // Each clone still sees exactly the terms it had.
        for (upto, c) in &clones {
            assert_eq!(c.len(), *upto as usize + 1);
            assert_eq!(c.lookup(&format!("term{upto}")), Some(*upto));
            assert_eq!(c.lookup(&format!("term{}", upto + 1)), None);
        }
    }

    #[test]
    fn compaction_in_place_when_unshared_and_by_copy_when_shared() {
        let mut v = Interned::new(100_000);
        for i in 0..(DELTA_MIN - 1) {
            v.intern(&format!("a{i}"));
        }
        let before = v.clone();
        assert!(v.sharing(&before).0);
        v.intern("one more");
        assert_eq!(v.compactions(), 1);
        assert_eq!(v.delta_len(), 0);
        assert!(!v.sharing(&before).0, "a shared base is rebuilt, never changed");
        assert_eq!(before.lookup("one more"), None);
        assert_eq!(before.delta_len(), DELTA_MIN - 1);
        assert_eq!(v.lookup("one more"), Some(DELTA_MIN as u32 - 1));
    }

    #[test]
    fn terms_sharing_their_first_bytes_are_told_apart() {
        // Lengths around 4, 8 and 12 bytes, shared first and last bytes, and zero bytes.
        let terms = [
            "", "a", "\0", "ab", "abc", "abc\0", "axc", "abcd", "abxcd", "abcxd", "abcdefg", "abcxefg", "abcdefgh", "abcdefghijk",
            "abcdefgxijk", "abcdefghijkl", "abcdefghxjkl", "abcdefghijklm", "abcdefghijklx", "abcdefghijklmnopqrstuvwxyz", "abcdefghijklmnopqrstuvwxyZ",
            "abcdefghijklmnopqrstuvwxyz\0",
        ];
        let mut v = Interned::new(100);
        for (i, t) in terms.iter().enumerate() {
            assert_eq!(v.intern(t), Some(i as u32), "{t:?}");
        }
        for (i, t) in terms.iter().enumerate() {
            assert_eq!(v.lookup(t), Some(i as u32), "{t:?}");
        }
        assert_eq!(v.lookup("abcdefghij"), None);
        assert_eq!(v.lookup("abcdxfghijkl"), None);
        assert_eq!(v.lookup("abcdefghijklmnopqrstuvwxy"), None);
        let w = Interned::from_terms(terms, 100).unwrap();
        assert!(terms.iter().enumerate().all(|(i, t)| w.lookup(t) == Some(i as u32)));
    }

    #[test]
    fn bounded_and_duplicates_refused() {
        let mut v = Interned::new(2);
        assert_eq!(v.intern("a"), Some(0));
        assert_eq!(v.intern("b"), Some(1));
        assert_eq!(v.intern("c"), None);
        assert!(Interned::from_terms(["x", "y", "x"], 10).is_err());
        let w = Interned::from_terms(["x", "y"], 10).unwrap();
        assert_eq!(w.lookup("y"), Some(1));
        assert_eq!(w, Interned::from_terms(vec![String::from("x"), String::from("y")], 10).unwrap());
        assert_ne!(w, Interned::from_terms(["y", "x"], 10).unwrap(), "order is part of the vocabulary");
    }
}
