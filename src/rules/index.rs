//! The term index of a rule set: first token → range of postings. Terms of up to 16 bytes (nearly all) are keyed by their bytes packed into two words, so a lookup hashes two words and compares the key in the table itself, with no pointer to follow and no call; longer terms go to a map keyed by the string.

use rustc_hash::FxHashMap;

/// The longest term kept in the packed map.
const SHORT: usize = 16;

/// A term of at most 16 bytes as two little-endian words, zero-padded. Terms
/// hold no NUL byte (the analyzer never makes one), so padding cannot make two
/// terms equal. Loads overlapping words instead of copying byte by byte.
#[inline]
fn pack(term: &str) -> Option<[u64; 2]> {
    let b = term.as_bytes();
    let n = b.len();
    let word = |at: usize| u64::from_le_bytes(b[at..at + 8].try_into().expect("8 bytes"));
    let half = |at: usize| u64::from(u32::from_le_bytes(b[at..at + 4].try_into().expect("4 bytes")));
    Some(match n {
        0 => [0, 0],
        1..=3 => [u64::from(b[0]) | u64::from(b[n / 2]) << (8 * (n / 2)) | u64::from(b[n - 1]) << (8 * (n - 1)), 0],
        4..=7 => [half(0) | (half(n - 4) >> (8 * (8 - n))) << 32, 0],
        8 => [word(0), 0],
        9..=SHORT => [word(0), word(n - 8) >> (8 * (16 - n))],
        _ => return None,
    })
}

#[derive(Debug, Clone, Default)]
pub(crate) struct TermIndex {
    short: FxHashMap<[u64; 2], (u32, u32)>,
    long: FxHashMap<Box<str>, (u32, u32)>,
}

impl TermIndex {
    pub(crate) fn insert(&mut self, term: &str, range: (u32, u32)) {
        debug_assert!(!term.contains('\0'), "analyzed terms hold no NUL byte");
        match pack(term) {
            Some(k) => self.short.insert(k, range),
            None => self.long.insert(term.into(), range),
        };
    }

    /// The posting range of `term`, if a rule lists it first.
    #[inline]
    pub(crate) fn get(&self, term: &str) -> Option<(u32, u32)> {
        match pack(term) {
            Some(k) => self.short.get(&k).copied(),
            None => self.long.get(term).copied(),
        }
    }

    /// Distinct terms in the index.
    pub(crate) fn len(&self) -> usize {
        self.short.len() + self.long.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packing_is_the_zero_padded_bytes() {
        for n in 0..=16 {
            let t: String = "abcdefghijklmnopq"[..n].to_string();
            let mut buf = [0u8; 16];
            buf[..n].copy_from_slice(t.as_bytes());
            let want = [u64::from_le_bytes(buf[..8].try_into().unwrap()), u64::from_le_bytes(buf[8..].try_into().unwrap())];
            assert_eq!(pack(&t), Some(want), "{t:?}");
        }
        assert_eq!(pack("abcdefghijklmnopq"), None);
        assert_eq!(pack("ü"), pack("\u{fc}"));
    }

    #[test]
    fn short_and_long_terms_are_found_and_nothing_else() {
        let mut idx = TermIndex::default();
        let terms = ["a", "refund", "exactly16bytes!!", "seventeen-bytes!!", "<order_no>", "überweisung", "a-much-longer-term-than-sixteen"];
        for (i, t) in terms.iter().enumerate() {
            idx.insert(t, (i as u32, i as u32 + 1));
        }
        assert_eq!(idx.len(), terms.len());
        for (i, t) in terms.iter().enumerate() {
            assert_eq!(idx.get(t), Some((i as u32, i as u32 + 1)), "{t}");
        }
        for miss in ["", "refunds", "refun", "exactly16bytes!", "seventeen-bytes!", "a-much-longer-term-than-sixteen!", "ab"] {
            assert_eq!(idx.get(miss), None, "{miss:?}");
        }
    }
}
