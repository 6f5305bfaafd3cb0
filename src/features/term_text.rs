//! Append-only term text in fixed-size shared chunks: a clone copies one pointer per chunk, an append copies at most the last chunk, once per clone.

use std::sync::Arc;

/// Terms per chunk is `1 << TERM_CHUNK_SHIFT` (4,096): a clone of a 1M-term
/// vocabulary copies 245 pointers, and the first append after a clone copies one
/// chunk of about 4,096 × (mean term length + 4) bytes.
pub const TERM_CHUNK_SHIFT: u32 = 12;
const TERM_CHUNK: usize = 1 << TERM_CHUNK_SHIFT;
const MASK: usize = TERM_CHUNK - 1;

#[derive(Clone, Default)]
struct Chunk {
    /// The terms of this chunk, back to back.
    text: String,
    /// End offset in `text` of each term.
    ends: Vec<u32>,
}

/// Terms in id order. Ids are positions and never change.
#[derive(Clone, Default)]
pub struct TermText {
    chunks: Vec<Arc<Chunk>>,
    len: usize,
}

impl TermText {
    pub fn len(&self) -> usize {
        self.len
    }

    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The term with id `id` (< `len`).
    #[inline]
    pub fn get(&self, id: u32) -> &str {
        let ch = &self.chunks[id as usize >> TERM_CHUNK_SHIFT];
        let i = id as usize & MASK;
        let start = if i == 0 { 0 } else { ch.ends[i - 1] as usize };
        &ch.text[start..ch.ends[i] as usize]
    }

    /// The bytes of term `id`, given where it starts in its chunk and its length:
    /// one load fewer than `get`, for the index's equality check.
    #[inline]
    pub fn bytes_at(&self, id: u32, start: u32, len: u32) -> &[u8] {
        let ch = &self.chunks[id as usize >> TERM_CHUNK_SHIFT];
        &ch.text.as_bytes()[start as usize..start as usize + len as usize]
    }

    /// Append a term; returns its id and where it starts in its chunk, or `None`
    /// if its chunk's text would pass 4 GiB (terms averaging over 1 MiB).
    pub fn push(&mut self, term: &str) -> Option<(u32, u32)> {
        if self.len & MASK == 0 {
            self.chunks.push(Arc::new(Chunk { text: String::new(), ends: Vec::with_capacity(TERM_CHUNK) }));
        }
        let ch = Arc::make_mut(self.chunks.last_mut().expect("a chunk was just ensured"));
        let start = ch.text.len();
        let end = u32::try_from(start + term.len()).ok()?;
        ch.text.push_str(term);
        ch.ends.push(end);
        let id = self.len as u32;
        self.len += 1;
        Some((id, start as u32))
    }

    pub fn iter(&self) -> impl Iterator<Item = &str> + '_ {
        self.chunks.iter().flat_map(|ch| {
            ch.ends.iter().scan(0usize, move |start, &end| {
                let t = &ch.text[*start..end as usize];
                *start = end as usize;
                Some(t)
            })
        })
    }

    /// Chunks, and how many of them `other` shares (the same allocation).
    pub fn sharing(&self, other: &TermText) -> (usize, usize) {
        let shared = self.chunks.iter().zip(&other.chunks).filter(|(a, b)| Arc::ptr_eq(a, b)).count();
        (shared, self.chunks.len())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_are_positions_across_chunks() {
        let mut t = TermText::default();
        let n = 3 * TERM_CHUNK + 5;
        for i in 0..n {
            let (id, start) = t.push(&format!("t{i}")).unwrap();
            assert_eq!(id as usize, i);
            assert_eq!(t.bytes_at(id, start, format!("t{i}").len() as u32), format!("t{i}").as_bytes());
        }
        assert_eq!(t.len(), n);
        assert_eq!(t.get(0), "t0");
        assert_eq!(t.get(TERM_CHUNK as u32), format!("t{TERM_CHUNK}"));
        assert_eq!(t.get(n as u32 - 1), format!("t{}", n - 1));
        let all: Vec<&str> = t.iter().collect();
        assert_eq!(all.len(), n);
        assert!(all.iter().enumerate().all(|(i, s)| *s == format!("t{i}")));
    }

    #[test]
    fn a_clone_shares_every_chunk_and_an_append_copies_only_the_last() {
        let mut a = TermText::default();
        for i in 0..2 * TERM_CHUNK + 10 {
            a.push(&format!("w{i}")).unwrap();
        }
        let b = a.clone();
        assert_eq!(a.sharing(&b), (3, 3));
        a.push("new").unwrap();
        assert_eq!(a.sharing(&b), (2, 3), "only the last chunk was copied");
        assert_eq!(b.len(), 2 * TERM_CHUNK + 10, "the clone did not see the append");
        assert_eq!(a.get(a.len() as u32 - 1), "new");
    }
}
