//! Per-row model storage with copy-on-write of single rows: rows live in append-only segments that clones share, so a clone copies only the row table (8 bytes a row), and a write to a row a clone still shares first moves that row into a segment only the writer holds.
//!
//! A row is `[total, logw × K, counts × K]`: the row total and the cached log
//! weights that scoring reads sit together, the counts after them.
//!
//! - **Reading** a row: its place in the table (segment, slot), then the segment.
//! - **Cloning**: the table is copied (plain data, no reference counts per row) and
//!   each segment's reference count goes up by one (a few hundred for 1M rows).
//! - **Writing** a row whose segment no clone shares: in place. Otherwise the row
//!   is first copied to the end of the *open* segment, which only this store holds
//!   (a new one is started when it is full or a clone shares it), and the table
//!   points there. So a learn after a publish copies exactly the rows it writes.
//! - **Memory**: a segment other than the open one is evacuated (its live rows are
//!   moved to the open segment) as soon as fewer than half a segment's slots are
//!   live, and dropped by this store when none are. Segments hold at most twice
//!   the live rows plus one segment; a clone keeps alive what it shares until it
//!   is dropped. This includes an open segment sealed by a clone while less than
//!   half full, so the first write after a clone may carry up to half a segment of
//!   rows forward, and small segments do not pile up at low label rates.
//!
//! Moves never change row ids, so term ids, snapshots and fingerprints are unaffected.

use std::sync::Arc;

/// Rows per segment: 4,096 rows of a 20-class model are 1.3 MB. A clone of a
/// 1M-row model shares 245 segments. See `docs/architecture.md` for the figures.
pub const SEGMENT_ROWS: usize = 4096;

/// Where a row lives: segment index and slot in it. Valid until the store is next written.
#[derive(Clone, Copy, PartialEq, Eq, Debug, Default)]
pub struct Place {
    seg: u32,
    at: u32,
}

#[derive(Default)]
struct Segment {
    /// Rows back to back, `stride` values each.
    data: Vec<f64>,
    /// The row id written to each slot (the slot is live while the table still points to it).
    owners: Vec<u32>,
}

/// Rows × K counts, the row totals and the log-weight cache.
#[derive(Clone)]
pub struct RowStore {
    k: usize,
    /// 2K + 1 values per row.
    stride: usize,
    table: Vec<Place>,
    segments: Vec<Arc<Segment>>,
    /// Live rows per segment (slots the table points to).
    live: Vec<u32>,
    /// The segment new and moved rows go to.
    open: Option<u32>,
    /// Indexes of dropped segments, for reuse; they hold `empty`.
    free: Vec<u32>,
    empty: Arc<Segment>,
}

/// One row, writable.
pub struct RowMut<'a> {
    pub total: &'a mut f64,
    pub logw: &'a mut [f64],
    pub counts: &'a mut [f64],
}

impl<'a> RowMut<'a> {
    fn split(row: &'a mut [f64], k: usize) -> RowMut<'a> {
        let (total, rest) = row.split_first_mut().expect("a row has a total");
        let (logw, counts) = rest.split_at_mut(k);
        RowMut { total, logw, counts }
    }
}

/// How much storage two stores share and what one of them holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Sharing {
    /// Rows of this store that read the very same memory in the other.
    pub shared_rows: usize,
    pub rows: usize,
    /// Row slots in the segments this store holds (live or not), and the segment count.
    pub slots: usize,
    pub segments: usize,
}

impl RowStore {
    /// `rows` zero rows of `k` classes, log weights `logw_fill`.
    pub fn new(k: usize, rows: usize, logw_fill: f64) -> RowStore {
        let mut s = RowStore {
            k,
            stride: 2 * k + 1,
            table: Vec::with_capacity(rows),
            segments: Vec::new(),
            live: Vec::new(),
            open: None,
            free: Vec::new(),
            empty: Arc::new(Segment::default()),
        };
        for _ in 0..rows {
            s.push(logw_fill);
        }
        s
    }

    #[inline]
    pub fn len(&self) -> usize {
        self.table.len()
    }

    #[inline]
    pub fn is_empty(&self) -> bool {
        self.table.is_empty()
    }

    #[inline]
    fn row(&self, id: u32) -> &[f64] {
        self.row_at(self.table[id as usize])
    }

    #[inline]
    fn row_at(&self, p: Place) -> &[f64] {
        let s = p.at as usize * self.stride;
        &self.segments[p.seg as usize].data[s..s + self.stride]
    }

    /// Where row `id` lives now: reading the places of many rows first, then their
    /// values (`weights_at`), lets the memory reads of different rows overlap.
    #[inline]
    pub fn place(&self, id: u32) -> Place {
        self.table[id as usize]
    }

    /// `weights` of the row at `p`, a place read since the last write.
    #[inline]
    pub fn weights_at(&self, p: Place) -> (f64, &[f64]) {
        let r = self.row_at(p);
        (r[0], &r[1..1 + self.k])
    }

    #[inline]
    pub fn total(&self, id: u32) -> f64 {
        self.row(id)[0]
    }

    #[inline]
    pub fn counts(&self, id: u32) -> &[f64] {
        &self.row(id)[1 + self.k..]
    }

    #[inline]
    pub fn logw(&self, id: u32) -> &[f64] {
        &self.row(id)[1..1 + self.k]
    }

    /// The row total and the log weights: what scoring reads.
    #[inline]
    pub fn weights(&self, id: u32) -> (f64, &[f64]) {
        let r = self.row(id);
        (r[0], &r[1..1 + self.k])
    }

    /// Apply `f` to the rows of `cells` in order, each with its weight, for a write
    /// to column `c`.
    ///
    /// First every row is read (and moved if a clone shares its segment), then the
    /// writes are done. Taking a segment for writing is an atomic operation, which on
    /// common CPUs keeps later reads from starting early; reading all rows first lets
    /// their cache misses overlap, and a run of rows in one segment takes it once.
    pub fn update(&mut self, cells: &[(u32, f64)], c: usize, mut f: impl FnMut(RowMut<'_>, f64)) {
        let mut acc = 0.0;
        for &(id, _) in cells {
            let p = self.table[id as usize];
            if is_unique(&self.segments[p.seg as usize]) {
                let r = self.row_at(p);
                acc += r[0] + r[1 + c] + r[1 + self.k + c];
            } else {
                self.relocate(id);
                self.evacuate_if_sparse(p.seg);
            }
        }
        std::hint::black_box(acc);
        let (k, stride) = (self.k, self.stride);
        let (table, segments) = (&self.table, &mut self.segments);
        let mut current: Option<(u32, &mut Segment)> = None;
        for &(id, w) in cells {
            let p = table[id as usize];
            let seg = match current {
                Some((i, seg)) if i == p.seg => seg,
                _ => unique_mut(&mut segments[p.seg as usize]),
            };
            let s = p.at as usize * stride;
            f(RowMut::split(&mut seg.data[s..s + stride], k), w);
            current = Some((p.seg, seg));
        }
    }

    /// A writable row; moved first if a clone shares its segment.
    #[inline]
    pub fn row_mut(&mut self, id: u32) -> RowMut<'_> {
        let mut p = self.table[id as usize];
        if !is_unique(&self.segments[p.seg as usize]) {
            self.relocate(id);
            self.evacuate_if_sparse(p.seg);
            p = self.table[id as usize];
        }
        let (k, stride) = (self.k, self.stride);
        let seg = unique_mut(&mut self.segments[p.seg as usize]);
        let s = p.at as usize * stride;
        RowMut::split(&mut seg.data[s..s + stride], k)
    }

    /// Append a zero row with log weights `logw_fill`.
    pub fn push(&mut self, logw_fill: f64) {
        let id = self.table.len() as u32;
        let (seg, stride) = (self.open_segment(), self.stride);
        let open = unique_mut(&mut self.segments[seg as usize]);
        let at = open.owners.len() as u32;
        open.data.push(0.0);
        open.data.extend(std::iter::repeat(logw_fill).take(self.k));
        open.data.extend(std::iter::repeat(0.0).take(self.k));
        debug_assert_eq!(open.data.len(), (at as usize + 1) * stride);
        open.owners.push(id);
        self.live[seg as usize] += 1;
        self.table.push(Place { seg, at });
    }

    /// Visit every row, writable, in id order.
    pub fn for_each_mut(&mut self, mut f: impl FnMut(usize, RowMut<'_>)) {
        for id in 0..self.table.len() {
            f(id, self.row_mut(id as u32));
        }
    }

    /// What this store shares with `other` (a clone, or the store it was cloned from).
    pub fn sharing(&self, other: &RowStore) -> Sharing {
        let shared_rows = (0..self.table.len().min(other.table.len()))
            .filter(|&id| {
                let (a, b) = (self.table[id], other.table[id]);
                a == b && Arc::ptr_eq(&self.segments[a.seg as usize], &other.segments[b.seg as usize])
            })
            .count();
        let held = || self.segments.iter().filter(|s| !Arc::ptr_eq(s, &self.empty));
        Sharing {
            shared_rows,
            rows: self.table.len(),
            slots: held().map(|s| s.owners.len()).sum(),
            segments: held().count(),
        }
    }

    /// All log weights in row-major order (tests and tools).
    pub fn logw_flat(&self) -> Vec<f64> {
        (0..self.table.len() as u32).flat_map(|id| self.logw(id).iter().copied()).collect()
    }

    // ---- internals -------------------------------------------------------

    /// The index of a segment this store alone holds, with a free slot.
    fn open_segment(&mut self) -> u32 {
        loop {
            if let Some(o) = self.open {
                let seg = &self.segments[o as usize];
                if is_unique(seg) && seg.owners.len() < SEGMENT_ROWS {
                    return o;
                }
            }
            let fresh = Arc::new(Segment { data: Vec::new(), owners: Vec::new() });
            let new = match self.free.pop() {
                Some(i) => {
                    self.segments[i as usize] = fresh;
                    i
                }
                None => {
                    self.segments.push(fresh);
                    self.live.push(0);
                    self.segments.len() as u32 - 1
                }
            };
            if let Some(sealed) = self.open.replace(new) {
                // Sealed while a clone shares it, maybe nearly empty: don't keep it for a few rows.
                self.evacuate_if_sparse(sealed);
            }
        }
    }

    /// Copy row `id` to the open segment and point the table there.
    fn relocate(&mut self, id: u32) {
        let to = self.open_segment();
        let from = self.table[id as usize];
        if is_unique(&self.segments[from.seg as usize]) {
            return; // moved already, by the evacuation that opening a segment may do
        }
        let src = Arc::clone(&self.segments[from.seg as usize]);
        let stride = self.stride;
        let open = unique_mut(&mut self.segments[to as usize]);
        let at = open.owners.len() as u32;
        let s = from.at as usize * stride;
        open.data.extend_from_slice(&src.data[s..s + stride]);
        open.owners.push(id);
        drop(src);
        self.table[id as usize] = Place { seg: to, at };
        self.live[to as usize] += 1;
        self.live[from.seg as usize] -= 1;
        if self.live[from.seg as usize] == 0 {
            self.segments[from.seg as usize] = Arc::clone(&self.empty);
            self.free.push(from.seg);
        }
    }

    /// Move the live rows out of segment `s` if it is not the open one and less
    /// than half of a segment is live.
    fn evacuate_if_sparse(&mut self, s: u32) {
        let live = self.live[s as usize] as usize;
        if self.open == Some(s) || live == 0 || live >= SEGMENT_ROWS / 2 {
            return;
        }
        let seg = Arc::clone(&self.segments[s as usize]);
        for (at, &id) in seg.owners.iter().enumerate() {
            if self.table[id as usize] == (Place { seg: s, at: at as u32 }) {
                self.relocate(id);
            }
        }
        debug_assert_eq!(self.live[s as usize], 0);
    }
}

/// No `Weak` is ever made, so one strong count means this store is the only holder.
#[inline]
fn is_unique(seg: &Arc<Segment>) -> bool {
    Arc::strong_count(seg) == 1
}

#[inline]
fn unique_mut(seg: &mut Arc<Segment>) -> &mut Segment {
    match Arc::get_mut(seg) {
        Some(s) => s,
        None => unreachable!("the segment was checked or made unique"),
    }
}

impl std::fmt::Debug for RowStore {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RowStore").field("rows", &self.table.len()).field("k", &self.k).field("segments", &self.segments.len()).finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_keep_their_cells_across_segments() {
        let n = SEGMENT_ROWS as u32 + 10;
        let mut s = RowStore::new(3, n as usize, -1.0);
        assert_eq!(s.len(), n as usize);
        for id in 0..n {
            let r = s.row_mut(id);
            r.counts[1] = id as f64;
            *r.total = id as f64;
            r.logw[2] = id as f64 * 0.5;
        }
        for id in 0..n {
            assert_eq!(s.counts(id), &[0.0, id as f64, 0.0]);
            assert_eq!(s.total(id), id as f64);
            assert_eq!(s.logw(id), &[-1.0, -1.0, id as f64 * 0.5]);
            assert_eq!(s.weights(id), (id as f64, s.logw(id)));
        }
        let mut seen = Vec::new();
        s.for_each_mut(|id, r| seen.push((id, r.counts[1])));
        assert_eq!(seen, (0..n as usize).map(|i| (i, i as f64)).collect::<Vec<_>>());
        assert_eq!(s.logw_flat().len(), 3 * n as usize);
        assert_eq!(s.sharing(&s.clone()).segments, 2);
    }

    #[test]
    fn a_write_after_a_clone_moves_that_row_only_and_leaves_the_clone_alone() {
        let mut a = RowStore::new(2, 3 * SEGMENT_ROWS, 0.0);
        let b = a.clone();
        let all = a.sharing(&b);
        assert_eq!((all.shared_rows, all.rows, all.segments), (3 * SEGMENT_ROWS, 3 * SEGMENT_ROWS, 3));
        a.row_mut(5).counts[0] = 5.0;
        a.row_mut(SEGMENT_ROWS as u32 + 7).counts[1] = 7.0;
        a.row_mut(5).counts[1] = 6.0;
        let after = a.sharing(&b);
        assert_eq!(after.shared_rows, 3 * SEGMENT_ROWS - 2, "two rows moved, the second write to row 5 was in place");
        assert_eq!(after.segments, 4, "one new segment holds the moved rows");
        assert_eq!(after.slots, 3 * SEGMENT_ROWS + 2);
        assert_eq!(b.counts(5), &[0.0, 0.0]);
        assert_eq!(a.counts(5), &[5.0, 6.0]);
        assert_eq!(a.counts(SEGMENT_ROWS as u32 + 7), &[0.0, 7.0]);
        // Appending after a clone: the new row goes to a segment the clone does not see.
        let mut c = RowStore::new(1, 1, 2.0);
        let d = c.clone();
        c.push(3.0);
        assert_eq!((c.len(), d.len()), (2, 1));
        assert_eq!(c.logw(1), &[3.0]);
        assert_eq!(c.logw(0), &[2.0]);
        assert_eq!(d.logw(0), &[2.0]);
    }

    #[test]
    fn memory_stays_within_twice_the_live_rows_through_many_clones() {
        // Each round: publish (clone), then write a scattered tenth of the rows.
        let rows = 5 * SEGMENT_ROWS;
        let mut a = RowStore::new(2, rows, 0.0);
        let mut x: u64 = 12345;
        let mut views = Vec::new();
        for round in 0..40 {
            views.push(a.clone());
            if views.len() > 2 {
                views.remove(0);
            }
            for _ in 0..rows / 10 {
                x = x.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                let id = (x >> 33) as u32 % rows as u32;
                a.row_mut(id).counts[0] += 1.0;
                *a.row_mut(id).total += 1.0;
            }
            let s = a.sharing(&views[views.len() - 1]);
            assert!(s.slots <= 2 * rows + SEGMENT_ROWS, "round {round}: {s:?}");
        }
        // Every write arrived, wherever the rows went.
        let total: f64 = (0..rows as u32).map(|id| a.counts(id)[0]).sum();
        assert_eq!(total, 40.0 * (rows / 10) as f64);
        assert!((0..rows as u32).all(|id| a.total(id) == a.counts(id)[0]));
        // With no clone left, writes are in place: nothing moves, nothing grows.
        views.clear();
        let before = a.sharing(&a.clone());
        let mut b = a.clone();
        drop(a);
        for id in 0..rows as u32 {
            b.row_mut(id).counts[1] = 1.0;
        }
        assert_eq!(b.sharing(&b.clone()).slots, before.slots);
    }
}
