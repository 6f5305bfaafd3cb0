//! The recent-record cache: the analyzed terms of records this replica scored, by id, bounded in entries and age, so id-only labels can be resolved into complete events.
//!
//! Eviction is first-in first-out by insertion; re-inserting an id refreshes
//! it. Entries older than the TTL are misses. A miss (evicted, expired, or
//! scored before a restart) cannot be resolved: the label is dead-lettered as
//! `unknown id`. Time is passed in, so the structure stays pure and testable.

use std::collections::VecDeque;
use std::sync::Arc;
use std::time::{Duration, Instant};

use rustc_hash::FxHashMap;

use crate::text::bag::FeatureList;
use crate::text::TermBag;

/// What is kept about a scored record.
#[derive(Debug, Clone, PartialEq)]
pub struct CachedRecord {
    /// The analyzed terms, as scored, packed.
    pub terms: PackedTerms,
    /// The class it was routed to.
    pub class: std::sync::Arc<str>,
    /// The input partition it came from.
    pub partition: i32,
    /// When it was scored (Unix milliseconds).
    pub scored_ms: i64,
}

/// A record's terms, merged by term and packed into one allocation:
/// per term a u16 byte length, the UTF-8 bytes, and the weight as a u32 count
/// of 1/16ths (every weight is a multiple of 1/16, so this is exact). About
/// half the memory of a `TermBag`, which matters at a million entries.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PackedTerms(Box<[u8]>);

impl PackedTerms {
    pub fn pack(bag: &TermBag) -> PackedTerms {
        let merged = bag.aggregated();
        let mut out = Vec::with_capacity(merged.iter().map(|(t, _)| t.len() + 6).sum());
        for (t, w) in &merged {
            let len = t.len().min(u16::MAX as usize);
            out.extend_from_slice(&(len as u16).to_le_bytes());
            out.extend_from_slice(&t.as_bytes()[..len]);
            out.extend_from_slice(&((w * 16.0).round() as u32).to_le_bytes());
        }
        PackedTerms(out.into_boxed_slice())
    }

    /// The terms with their weights, in term order.
    pub fn features(&self) -> FeatureList {
        let mut v = Vec::new();
        let b = &self.0;
        let mut i = 0;
        while i + 2 <= b.len() {
            let len = u16::from_le_bytes([b[i], b[i + 1]]) as usize;
            let t = String::from_utf8_lossy(&b[i + 2..i + 2 + len]).into_owned();
            let q = u32::from_le_bytes(b[i + 2 + len..i + 6 + len].try_into().expect("4 bytes"));
            v.push((t, q as f64 / 16.0));
            i += 6 + len;
        }
        FeatureList(v)
    }

    pub fn bytes(&self) -> usize {
        self.0.len()
    }
}

struct Entry {
    record: CachedRecord,
    at: Instant,
    generation: u64,
}

/// Counters for metrics.
#[derive(Debug, Default, Clone, Copy, PartialEq)]
pub struct RecentStats {
    pub inserts: u64,
    pub hits: u64,
    pub misses: u64,
    pub expired: u64,
    pub evictions: u64,
}

pub struct RecentCache {
    capacity: usize,
    ttl: Duration,
    map: FxHashMap<Arc<str>, Entry>,
    order: VecDeque<(Arc<str>, u64)>,
    generation: u64,
    stats: RecentStats,
}

impl RecentCache {
    pub fn new(capacity: usize, ttl: Duration) -> RecentCache {
        assert!(capacity > 0, "capacity is validated in settings");
        RecentCache { capacity, ttl, map: FxHashMap::default(), order: VecDeque::new(), generation: 0, stats: RecentStats::default() }
    }

    pub fn len(&self) -> usize {
        self.map.len()
    }

    pub fn is_empty(&self) -> bool {
        self.map.is_empty()
    }

    pub fn capacity(&self) -> usize {
        self.capacity
    }

    pub fn stats(&self) -> RecentStats {
        self.stats
    }

    pub fn insert(&mut self, id: &str, record: CachedRecord, now: Instant) {
        self.generation += 1;
        let g = self.generation;
        self.stats.inserts += 1;
        let key: Arc<str> = Arc::from(id);
        self.map.insert(key.clone(), Entry { record, at: now, generation: g });
        self.order.push_back((key, g));
        while self.map.len() > self.capacity {
            self.evict_one();
        }
        // Re-inserted ids leave stale queue items; keep the queue bounded too.
        if self.order.len() > 2 * self.capacity {
            let map = &self.map;
            self.order.retain(|(id, g)| map.get(id).is_some_and(|e| e.generation == *g));
        }
    }

    fn evict_one(&mut self) {
        while let Some((id, g)) = self.order.pop_front() {
            if self.map.get(&id).is_some_and(|e| e.generation == g) {
                self.map.remove(&id);
                self.stats.evictions += 1;
                return;
            }
        }
    }

    /// The record for `id` if present and younger than the TTL.
    pub fn get(&mut self, id: &str, now: Instant) -> Option<&CachedRecord> {
        let expired = match self.map.get(id) {
            None => {
                self.stats.misses += 1;
                return None;
            }
            Some(e) => now.saturating_duration_since(e.at) > self.ttl,
        };
        if expired {
            self.map.remove(id);
            self.stats.misses += 1;
            self.stats.expired += 1;
            return None;
        }
        self.stats.hits += 1;
        self.map.get(id).map(|e| &e.record)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(class: &str) -> CachedRecord {
        CachedRecord { terms: PackedTerms::pack(&TermBag::from_pairs([("refund", 1.0)])), class: class.into(), partition: 0, scored_ms: 0 }
    }

    #[test]
    fn never_exceeds_capacity_under_a_million_inserts_and_counts_misses() {
        let mut c = RecentCache::new(10_000, Duration::from_secs(3600));
        let t = Instant::now();
        let mut max_len = 0;
        let mut max_queue = 0;
        for i in 0..1_000_000u64 {
            // A mix of fresh ids and re-inserted recent ones.
            let id = if i % 3 == 0 { format!("id{}", i / 2) } else { format!("id{i}") };
            c.insert(&id, rec("returns"), t);
            max_len = max_len.max(c.len());
            max_queue = max_queue.max(c.order.len());
        }
        assert!(max_len <= 10_000, "{max_len}");
        assert!(max_queue <= 20_001, "{max_queue}");
        assert_eq!(c.len(), 10_000);
        assert!(c.get("id0", t).is_none(), "evicted long ago");
        assert!(c.get("id999998", t).is_some(), "the newest is kept");
        let s = c.stats();
        assert_eq!(s.misses, 1);
        assert_eq!(s.hits, 1);
        assert_eq!(s.inserts, 1_000_000);
        assert!(s.evictions >= 1_000_000 - 10_000 - 400_000);
    }

    #[test]
    fn packed_terms_keep_every_term_and_weight_exactly() {
        let bag = TermBag::from_pairs([("refund", 2.0), ("<num>", 1.0), ("refund", 0.0625), ("größe", 64.0)]);
        let p = PackedTerms::pack(&bag);
        assert_eq!(p.features(), FeatureList::from(&bag));
        assert!(p.bytes() < 3 * 6 + "refund<num>größe".len() + 1);
    }

    #[test]
    fn expired_entries_are_misses() {
        let mut c = RecentCache::new(10, Duration::from_secs(60));
        let t = Instant::now();
        c.insert("a", rec("x"), t);
        assert!(c.get("a", t + Duration::from_secs(59)).is_some());
        assert!(c.get("a", t + Duration::from_secs(61)).is_none());
        assert_eq!(c.stats().expired, 1);
        assert!(c.is_empty());
    }

    #[test]
    fn reinsert_refreshes_position() {
        let mut c = RecentCache::new(2, Duration::from_secs(60));
        let t = Instant::now();
        c.insert("a", rec("x"), t);
        c.insert("b", rec("x"), t);
        c.insert("a", rec("y"), t);
        c.insert("c", rec("x"), t);
        assert!(c.get("b", t).is_none(), "b was the oldest");
        assert_eq!(&*c.get("a", t).unwrap().class, "y");
        assert!(c.get("c", t).is_some());
    }
}
