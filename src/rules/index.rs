//! The term index of a rule set: first token → range of postings. Terms of up to 16 bytes (nearly all) are keyed by their bytes packed into two words, in an open-addressing table of slot words (a key's number and 32 bits of its hash): a lookup mixes the two words with two multiplications and reads slots until an empty one or a matching hash, so record tokens that no rule lists rarely touch the keys; longer terms go to a map keyed by the string.

use rustc_hash::FxHashMap;

/// The longest term kept in the packed map.
const SHORT: usize = 16;

/// A term of at most 16 bytes as two little-endian words, zero-padded. Terms
/// hold no NUL byte (the analyzer never makes one), so padding cannot make two
/// terms equal. Loads overlapping words instead of copying byte by byte.
#[inline(always)]
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

/// Multipliers of the slot hash (odd 64-bit constants with mixed bits; the
/// first is 2^64 divided by the golden ratio, common practice for
/// multiplicative hashing).
const MIX_A: u64 = 0x9E37_79B9_7F4A_7C15;
const MIX_B: u64 = 0xD6E8_FEB8_6659_FD93;

/// The high half of a slot word.
const TAG: u64 = 0xFFFF_FFFF << 32;

#[inline(always)]
fn hash(key: [u64; 2]) -> u64 {
    (key[0].wrapping_mul(MIX_A) ^ key[1]).wrapping_mul(MIX_B)
}

/// 32 bits of the hash below the ones that pick the slot (for tables of up
/// to 2^12 slots; larger ones share some), kept in a slot to skip most keys
/// that only share the slot.
#[inline(always)]
fn tag(h: u64) -> u64 {
    (h >> 20) << 32
}

#[derive(Debug, Clone, Default)]
pub(crate) struct TermIndex {
    /// Open addressing with linear probing over `keys`: 0 is an empty slot,
    /// otherwise the low half k names `keys[k - 1]` and the high half is
    /// `tag` of its hash. A power of two long, at most half full.
    slots: Vec<u64>,
    /// 64 minus log2 of `slots.len()`: the hash's top bits pick the slot.
    shift: u32,
    /// Packed short terms and their posting ranges, in insertion order.
    keys: Vec<([u64; 2], (u32, u32))>,
    long: FxHashMap<Box<str>, (u32, u32)>,
}

impl TermIndex {
    pub(crate) fn insert(&mut self, term: &str, range: (u32, u32)) {
        debug_assert!(!term.contains('\0'), "analyzed terms hold no NUL byte");
        match pack(term) {
            Some(k) => self.insert_short(k, range),
            None => {
                self.long.insert(term.into(), range);
            }
        }
    }

    fn insert_short(&mut self, key: [u64; 2], range: (u32, u32)) {
        if let Some(at) = self.find(key) {
            self.keys[at].1 = range;
            return;
        }
        self.keys.push((key, range));
        if self.keys.len() * 2 > self.slots.len() {
            let size = (self.keys.len() * 2).next_power_of_two().max(16);
            self.slots = vec![0; size];
            self.shift = 64 - size.trailing_zeros();
            for k in 0..self.keys.len() {
                self.place(k);
            }
        } else {
            self.place(self.keys.len() - 1);
        }
    }

    /// Put `keys[k]` into the first free slot of its probe sequence.
    fn place(&mut self, k: usize) {
        let mask = self.slots.len() - 1;
        let h = hash(self.keys[k].0);
        let mut at = (h >> self.shift) as usize;
        while self.slots[at] != 0 {
            at = (at + 1) & mask;
        }
        self.slots[at] = tag(h) | u64::from(u32::try_from(k + 1).expect("fewer than 2^32 terms"));
    }

    /// Position of `key` in `keys`.
    #[inline]
    fn find(&self, key: [u64; 2]) -> Option<usize> {
        if self.slots.is_empty() {
            return None;
        }
        let mask = self.slots.len() - 1;
        let h = hash(key);
        let (mut at, want) = ((h >> self.shift) as usize, tag(h));
        loop {
            let slot = self.slots[at];
            if slot == 0 {
                return None;
            }
            if slot & TAG == want {
                let k = (slot as u32) as usize - 1;
                if self.keys[k].0 == key {
                    return Some(k);
                }
            }
            at = (at + 1) & mask;
        }
    }

    /// The posting range of `term`, if a rule lists it first.
    #[inline(always)]
    pub(crate) fn get(&self, term: &str) -> Option<(u32, u32)> {
        match pack(term) {
            Some(k) => self.find(k).map(|at| self.keys[at].1),
            None => self.long.get(term).copied(),
        }
    }

    /// Distinct terms in the index.
    pub(crate) fn len(&self) -> usize {
        self.keys.len() + self.long.len()
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

    #[test]
    fn a_growing_table_finds_every_term_and_a_repeat_replaces_its_range() {
        let mut idx = TermIndex::default();
        assert_eq!(idx.get("anything"), None);
        let terms: Vec<String> = (0..3000).map(|i| format!("t{i}")).collect();
        for (i, t) in terms.iter().enumerate() {
            idx.insert(t, (i as u32, i as u32 + 1));
            // Every term so far is still found after each growth of the table.
            if i.is_power_of_two() {
                for (j, u) in terms[..=i].iter().enumerate() {
                    assert_eq!(idx.get(u), Some((j as u32, j as u32 + 1)), "{u} after {i}");
                }
            }
        }
        assert_eq!(idx.len(), 3000);
        assert!(idx.slots.len() >= 2 * idx.keys.len());
        for (i, t) in terms.iter().enumerate() {
            assert_eq!(idx.get(t), Some((i as u32, i as u32 + 1)), "{t}");
            assert_eq!(idx.get(&format!("u{i}")), None);
        }
        idx.insert("t7", (9, 10));
        assert_eq!((idx.get("t7"), idx.len()), (Some((9, 10)), 3000));
    }
}
