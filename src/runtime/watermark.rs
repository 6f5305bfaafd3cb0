//! Per-partition offset watermarks: records begin in offset order, acks arrive in any order, and only the highest offset below which every record is acknowledged may be stored or committed.

use std::collections::{HashMap, VecDeque};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Condvar, Mutex};
use std::time::{Duration, Instant};

use tokio::sync::Notify;

/// Where an advanced watermark goes (the Kafka consumer's offset store, or nowhere).
pub trait OffsetSink: Send + Sync {
    /// `next` is the offset consumption would resume from (last contiguous ack + 1).
    fn store(&self, topic: &str, partition: i32, next: i64);
}

/// Stores nothing (stdin and file sources).
pub struct NoOffsets;
impl OffsetSink for NoOffsets {
    fn store(&self, _: &str, _: i32, _: i64) {}
}

#[derive(Debug, Default)]
struct State {
    /// Offsets begun and not yet passed by the watermark, ascending, with their ack flag.
    pending: VecDeque<(i64, bool)>,
    /// Acked records not yet below the watermark.
    acked_ahead: usize,
    /// Next offset to resume from: every record below it is acknowledged.
    watermark: Option<i64>,
    /// The watermark last handed to the offset sink.
    stored: Option<i64>,
    /// Set on revoke: late acks are ignored and nothing more is stored.
    closed: bool,
}

/// The tracking of one assigned partition.
pub struct PartitionTrack {
    pub topic: String,
    pub partition: i32,
    state: Mutex<State>,
    drained: Condvar,
    room: Arc<Room>,
    offsets: Arc<dyn OffsetSink>,
}

/// Wakes the record loop (or the drain) when an ack frees room; acks only pay for
/// the wake-up when someone announced it is waiting.
pub struct Room {
    notify: Notify,
    waiting: AtomicBool,
}

impl Room {
    fn new() -> Room {
        Room { notify: Notify::new(), waiting: AtomicBool::new(false) }
    }

    /// Call after enabling a `notified()` future and before re-checking the condition.
    pub fn announce_waiting(&self) {
        self.waiting.store(true, Ordering::SeqCst);
    }

    pub fn notified(&self) -> tokio::sync::futures::Notified<'_> {
        self.notify.notified()
    }

    fn wake(&self) {
        if self.waiting.swap(false, Ordering::SeqCst) {
            self.notify.notify_waiters();
        }
    }
}

impl PartitionTrack {
    /// True once the partition was revoked; a cached handle must be fetched again.
    pub fn is_closed(&self) -> bool {
        self.state.lock().expect("watermark lock").closed
    }

    /// Records begun and not yet acknowledged.
    pub fn in_flight(&self) -> usize {
        let s = self.state.lock().expect("watermark lock");
        s.pending.len() - s.acked_ahead
    }

    /// Register `offset` (offsets must begin in ascending order).
    pub fn begin(&self, offset: i64) {
        let mut s = self.state.lock().expect("watermark lock");
        debug_assert!(s.pending.back().map_or(true, |&(o, _)| o < offset));
        s.pending.push_back((offset, false));
    }

    /// Acknowledge `offset`; advances the watermark over every contiguous ack
    /// (handed to the offset sink by the next `Tracker::store_advanced`).
    pub fn ack(&self, offset: i64) {
        {
            let mut s = self.state.lock().expect("watermark lock");
            if s.closed {
                return;
            }
            let Ok(i) = s.pending.binary_search_by_key(&offset, |&(o, _)| o) else { return };
            if s.pending[i].1 {
                return;
            }
            s.pending[i].1 = true;
            s.acked_ahead += 1;
            let mut advanced = None;
            while let Some(&(o, true)) = s.pending.front() {
                s.pending.pop_front();
                s.acked_ahead -= 1;
                advanced = Some(o + 1);
            }
            if let Some(next) = advanced {
                s.watermark = Some(next);
            }
            if s.pending.is_empty() {
                self.drained.notify_all();
            }
        }
        self.room.wake();
    }

    /// Hand the watermark to the offset sink if it moved since last time.
    fn store_if_advanced(&self) {
        let next = {
            let mut s = self.state.lock().expect("watermark lock");
            if s.closed || s.watermark == s.stored {
                return;
            }
            s.stored = s.watermark;
            s.watermark
        };
        if let Some(n) = next {
            self.offsets.store(&self.topic, self.partition, n);
        }
    }

    /// The offset to commit, if any record has been acknowledged.
    pub fn watermark(&self) -> Option<i64> {
        self.state.lock().expect("watermark lock").watermark
    }

    /// Block the calling thread until nothing is in flight or `limit` passes; true if drained.
    pub fn wait_drained(&self, limit: Duration) -> bool {
        let deadline = Instant::now() + limit;
        let mut s = self.state.lock().expect("watermark lock");
        while !s.pending.is_empty() {
            let now = Instant::now();
            if now >= deadline {
                return false;
            }
            s = self.drained.wait_timeout(s, deadline - now).expect("watermark lock").0;
        }
        true
    }

    fn close(&self) {
        self.state.lock().expect("watermark lock").closed = true;
        self.room.notify.notify_waiters();
    }
}

/// All tracked partitions of one service instance.
pub struct Tracker {
    parts: Mutex<HashMap<String, Vec<Option<Arc<PartitionTrack>>>>>,
    room: Arc<Room>,
    offsets: Arc<dyn OffsetSink>,
}

impl Tracker {
    pub fn new(offsets: Arc<dyn OffsetSink>) -> Tracker {
        Tracker { parts: Mutex::new(HashMap::new()), room: Arc::new(Room::new()), offsets }
    }

    /// Woken when an ack frees room in some partition (after `announce_waiting`).
    pub fn room(&self) -> &Arc<Room> {
        &self.room
    }

    /// Store every watermark that moved (called on a short interval, and before commits).
    pub fn store_advanced(&self) {
        for t in self.all() {
            t.store_if_advanced();
        }
    }

    /// The track of a partition, created fresh if it is not tracked.
    pub fn get(&self, topic: &str, partition: i32) -> Arc<PartitionTrack> {
        let mut parts = self.parts.lock().expect("tracker lock");
        let idx = partition.max(0) as usize;
        if let Some(Some(t)) = parts.get(topic).and_then(|v| v.get(idx)) {
            return t.clone();
        }
        let slots = parts.entry(topic.to_string()).or_default();
        if slots.len() <= idx {
            slots.resize(idx + 1, None);
        }
        let t = Arc::new(PartitionTrack {
            topic: topic.to_string(),
            partition,
            state: Mutex::new(State::default()),
            drained: Condvar::new(),
            room: self.room.clone(),
            offsets: self.offsets.clone(),
        });
        slots[idx] = Some(t.clone());
        t
    }

    /// The track if the partition is tracked now.
    pub fn existing(&self, topic: &str, partition: i32) -> Option<Arc<PartitionTrack>> {
        let parts = self.parts.lock().expect("tracker lock");
        parts.get(topic).and_then(|v| v.get(partition.max(0) as usize)).and_then(|t| t.clone())
    }

    /// Stop tracking a partition (after its revoke was drained and committed).
    pub fn remove(&self, topic: &str, partition: i32) {
        let t = {
            let mut parts = self.parts.lock().expect("tracker lock");
            parts.get_mut(topic).and_then(|v| v.get_mut(partition.max(0) as usize)).and_then(Option::take)
        };
        if let Some(t) = t {
            t.close();
        }
    }

    /// Every tracked partition.
    pub fn all(&self) -> Vec<Arc<PartitionTrack>> {
        let parts = self.parts.lock().expect("tracker lock");
        parts.values().flat_map(|v| v.iter().flatten().cloned()).collect()
    }

    /// Records in flight over all partitions.
    pub fn in_flight(&self) -> usize {
        self.all().iter().map(|t| t.in_flight()).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Default)]
    struct Stored(Mutex<Vec<(String, i32, i64)>>);
    impl OffsetSink for Stored {
        fn store(&self, t: &str, p: i32, n: i64) {
            self.0.lock().unwrap().push((t.to_string(), p, n));
        }
    }

    #[test]
    fn out_of_order_acks_store_only_the_contiguous_watermark() {
        let stored = Arc::new(Stored::default());
        let tracker = Tracker::new(stored.clone());
        let p = tracker.get("in", 2);
        for o in [10, 11, 12, 14] {
            p.begin(o);
        }
        p.ack(12);
        p.ack(14);
        assert_eq!(p.watermark(), None, "10 and 11 are not acknowledged");
        assert_eq!(p.in_flight(), 2);
        p.ack(10);
        assert_eq!(p.watermark(), Some(11));
        tracker.store_advanced();
        p.ack(11);
        // 13 was never begun (a gap in offsets, e.g. a compacted record): 14 is next.
        assert_eq!(p.watermark(), Some(15));
        assert_eq!(p.in_flight(), 0);
        tracker.store_advanced();
        tracker.store_advanced(); // nothing moved: nothing stored again
        assert_eq!(*stored.0.lock().unwrap(), vec![("in".into(), 2, 11), ("in".into(), 2, 15)]);
        p.ack(11); // duplicate acks are harmless
        assert_eq!(p.watermark(), Some(15));
    }

    #[test]
    fn revoked_partition_ignores_late_acks_and_drain_waits() {
        let tracker = Tracker::new(Arc::new(NoOffsets));
        let p = tracker.get("in", 0);
        p.begin(0);
        assert!(!p.wait_drained(Duration::from_millis(20)));
        let p2 = p.clone();
        let h = std::thread::spawn(move || p2.ack(0));
        assert!(p.wait_drained(Duration::from_secs(5)));
        h.join().unwrap();
        p.begin(1);
        tracker.remove("in", 0);
        p.ack(1);
        assert_eq!(p.watermark(), Some(1), "late ack after revoke is ignored");
        assert!(tracker.existing("in", 0).is_none());
        assert!(!Arc::ptr_eq(&tracker.get("in", 0), &p), "a new assignment starts fresh");
    }
}
