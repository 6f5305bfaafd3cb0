//! Per-row model storage in small shared leaves with copy-on-write: a clone copies one pointer per leaf, and a write copies only the leaf it lands in, only while a clone still shares it.
//!
//! A row is `[total, logw × K, counts × K]`: the row total and the cached log
//! weights that scoring reads sit next to each other, the counts after them. A leaf
//! holds `LEAF_ROWS` consecutive rows in one allocation (`Arc<[f64]>`). Leaves are
//! allocated whole, so the last one may have unused rows.
//!
//! `LEAF_ROWS` = 4 was chosen with `cargo bench --bench publish` (1M rows × 20
//! classes, 5,000 learned records of 20 terms between publishes): writes scatter
//! over the rows (a rare term's row is wherever it was first seen), so small
//! leaves copy little per publish, while the pointer per leaf is what a clone
//! copies. The figures are in `docs/architecture.md`.

use std::sync::Arc;

pub const LEAF_SHIFT: u32 = 2;
pub const LEAF_ROWS: usize = 1 << LEAF_SHIFT;
const MASK: usize = LEAF_ROWS - 1;

/// Rows × K counts, the row totals and the log-weight cache.
#[derive(Clone)]
pub struct RowStore {
    k: usize,
    /// 2K + 1 values per row.
    stride: usize,
    rows: usize,
    leaves: Vec<Arc<[f64]>>,
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

impl RowStore {
    /// `rows` zero rows of `k` classes, log weights `logw_fill`.
    pub fn new(k: usize, rows: usize, logw_fill: f64) -> RowStore {
        let mut s = RowStore { k, stride: 2 * k + 1, rows: 0, leaves: Vec::with_capacity(rows.div_ceil(LEAF_ROWS)) };
        for _ in 0..rows {
            s.push(logw_fill);
        }
        s
    }

    #[inline]
    pub fn len(&self) -> usize {
        self.rows
    }

    #[inline]
    pub fn is_empty(&self) -> bool {
        self.rows == 0
    }

    #[inline]
    fn row(&self, id: u32) -> &[f64] {
        debug_assert!((id as usize) < self.rows);
        let leaf = &self.leaves[id as usize >> LEAF_SHIFT];
        let s = (id as usize & MASK) * self.stride;
        &leaf[s..s + self.stride]
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

    /// A writable row; copies its leaf first if a clone shares it.
    #[inline]
    pub fn row_mut(&mut self, id: u32) -> RowMut<'_> {
        debug_assert!((id as usize) < self.rows);
        let (k, stride) = (self.k, self.stride);
        let leaf = leaf_mut(&mut self.leaves[id as usize >> LEAF_SHIFT]);
        let s = (id as usize & MASK) * stride;
        RowMut::split(&mut leaf[s..s + stride], k)
    }

    /// Append a zero row with log weights `logw_fill`.
    pub fn push(&mut self, logw_fill: f64) {
        if self.rows & MASK == 0 {
            self.leaves.push(std::iter::repeat(0.0).take(LEAF_ROWS * self.stride).collect());
        }
        self.rows += 1;
        let row = self.row_mut(self.rows as u32 - 1);
        *row.total = 0.0;
        row.counts.fill(0.0);
        row.logw.fill(logw_fill);
    }

    /// Visit every row, writable, in id order (copies every shared leaf).
    pub fn for_each_mut(&mut self, mut f: impl FnMut(usize, RowMut<'_>)) {
        let (k, stride, rows) = (self.k, self.stride, self.rows);
        for (l, leaf) in self.leaves.iter_mut().enumerate() {
            let leaf = leaf_mut(leaf);
            for (i, row) in leaf.chunks_exact_mut(stride).enumerate() {
                let id = l * LEAF_ROWS + i;
                if id >= rows {
                    return;
                }
                f(id, RowMut::split(row, k));
            }
        }
    }

    /// Leaves, and how many of them `other` shares (the same allocation).
    pub fn sharing(&self, other: &RowStore) -> (usize, usize) {
        let shared = self.leaves.iter().zip(&other.leaves).filter(|(a, b)| Arc::ptr_eq(a, b)).count();
        (shared, self.leaves.len())
    }

    /// All log weights in row-major order (tests and tools).
    pub fn logw_flat(&self) -> Vec<f64> {
        (0..self.rows as u32).flat_map(|id| self.logw(id).iter().copied()).collect()
    }
}

/// The leaf, unshared: copied first if anyone else holds it.
#[inline]
fn leaf_mut(leaf: &mut Arc<[f64]>) -> &mut [f64] {
    if Arc::get_mut(leaf).is_none() {
        *leaf = Arc::from(&leaf[..]);
    }
    Arc::get_mut(leaf).expect("a fresh copy has one owner")
}

impl std::fmt::Debug for RowStore {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RowStore").field("rows", &self.rows).field("k", &self.k).field("leaves", &self.leaves.len()).finish()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_keep_their_cells_across_leaves() {
        let mut s = RowStore::new(3, 10, -1.0);
        assert_eq!(s.len(), 10);
        for id in 0..10u32 {
            let r = s.row_mut(id);
            r.counts[1] = id as f64;
            *r.total = id as f64;
            r.logw[2] = id as f64 * 0.5;
        }
        for id in 0..10u32 {
            assert_eq!(s.counts(id), &[0.0, id as f64, 0.0]);
            assert_eq!(s.total(id), id as f64);
            assert_eq!(s.logw(id), &[-1.0, -1.0, id as f64 * 0.5]);
            assert_eq!(s.weights(id), (id as f64, s.logw(id)));
        }
        let mut seen = Vec::new();
        s.for_each_mut(|id, r| seen.push((id, r.counts[1])));
        assert_eq!(seen, (0..10).map(|i| (i, i as f64)).collect::<Vec<_>>(), "unused rows of the last leaf are not visited");
        assert_eq!(s.logw_flat().len(), 30);
    }

    #[test]
    fn a_write_after_clone_copies_one_leaf_and_leaves_the_clone_alone() {
        let mut a = RowStore::new(2, 10 * LEAF_ROWS, 0.0);
        let b = a.clone();
        assert_eq!(a.sharing(&b), (10, 10));
        a.row_mut(LEAF_ROWS as u32 * 3 + 1).counts[0] = 5.0;
        assert_eq!(a.sharing(&b), (9, 10));
        a.row_mut(LEAF_ROWS as u32 * 3).counts[1] = 7.0;
        assert_eq!(a.sharing(&b), (9, 10), "a leaf is copied once, then written in place");
        assert_eq!(b.counts(LEAF_ROWS as u32 * 3 + 1), &[0.0, 0.0]);
        assert_eq!(a.counts(LEAF_ROWS as u32 * 3 + 1), &[5.0, 0.0]);
        // Appending after a clone: the shared last leaf is copied before its new row is set.
        let mut c = RowStore::new(1, 1, 2.0);
        let d = c.clone();
        c.push(3.0);
        assert_eq!((c.len(), d.len()), (2, 1));
        assert_eq!(c.logw(1), &[3.0]);
        assert_eq!(c.sharing(&d), (0, 1));
    }
}
