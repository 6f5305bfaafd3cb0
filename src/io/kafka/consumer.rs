//! The Kafka source: a group consumer whose rebalance callbacks drain and commit revoked partitions, start fresh watermarks for assigned ones, and mark the group join for readiness.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, OnceLock, Weak};
use std::time::{Duration, Instant};

use rdkafka::consumer::{BaseConsumer, CommitMode, Consumer, ConsumerContext, Rebalance, StreamConsumer};
use rdkafka::error::KafkaResult;
use rdkafka::{ClientContext, Offset, TopicPartitionList};

use crate::metrics::Metrics;
use crate::runtime::assignment::Assignment;
use crate::runtime::watermark::{OffsetSink, Tracker};

pub type SourceConsumer = StreamConsumer<SourceContext>;

/// Stores advanced watermarks in the consumer's offset store (committed by auto-commit).
#[derive(Default)]
pub struct ConsumerOffsets {
    consumer: OnceLock<Weak<SourceConsumer>>,
}

impl ConsumerOffsets {
    pub fn attach(&self, c: &Arc<SourceConsumer>) {
        let _ = self.consumer.set(Arc::downgrade(c));
    }
}

impl OffsetSink for ConsumerOffsets {
    fn store(&self, topic: &str, partition: i32, next: i64) {
        let Some(c) = self.consumer.get().and_then(Weak::upgrade) else { return };
        let mut tpl = TopicPartitionList::with_capacity(1);
        if tpl.add_partition_offset(topic, partition, Offset::Offset(next)).is_ok() {
            // Fails only for a partition no longer assigned: its new owner reads it again.
            if let Err(e) = c.store_offsets(&tpl) {
                tracing::debug!("offset store {topic}/{partition}@{next}: {e}");
            }
        }
    }
}

/// Rebalance and commit callbacks of the source consumer.
pub struct SourceContext {
    pub tracker: Arc<Tracker>,
    pub metrics: Arc<Metrics>,
    pub revoke_drain: Duration,
    /// Set once the first assignment (possibly empty) arrives: the group join completed.
    pub joined: Arc<AtomicBool>,
    /// The partitions owned now, for `GET /assignment` and the log.
    pub assignment: Arc<Assignment>,
}

impl ClientContext for SourceContext {
    /// librdkafka's statistics (every `drift.consumer_lag_interval_ms`): the consumer lag gauge.
    fn stats_raw(&self, statistics: &[u8]) {
        if let Some(lag) = crate::io::kafka::lag::consumer_lag(statistics) {
            self.metrics.drift.consumer_lag.set(lag);
        }
    }
}

impl ConsumerContext for SourceContext {
    fn pre_rebalance(&self, consumer: &BaseConsumer<Self>, rebalance: &Rebalance<'_>) {
        if let Rebalance::Revoke(tpl) = rebalance {
            let deadline = Instant::now() + self.revoke_drain;
            let mut commit = TopicPartitionList::new();
            let elements = tpl.elements();
            for e in &elements {
                let Some(track) = self.tracker.existing(e.topic(), e.partition()) else { continue };
                if !track.wait_drained(deadline.saturating_duration_since(Instant::now())) {
                    self.metrics.drain_timeouts.inc();
                    tracing::warn!(
                        "revoke of {}/{}: {} records still in flight after {:?}; they will be read again",
                        e.topic(),
                        e.partition(),
                        track.in_flight(),
                        self.revoke_drain
                    );
                }
                if let Some(w) = track.watermark() {
                    let _ = commit.add_partition_offset(e.topic(), e.partition(), Offset::Offset(w));
                }
            }
            if commit.count() > 0 {
                commit_counted(consumer, &commit, &self.metrics);
            }
            for e in &elements {
                self.tracker.remove(e.topic(), e.partition());
            }
            self.metrics.partitions_assigned.sub(elements.len() as i64);
            self.metrics.rebalances.with_label_values(&["revoke"]).inc();
            self.assignment.remove(elements.iter().map(|e| (e.topic(), e.partition())));
            tracing::info!("revoked {} partitions; assignment now: {}", elements.len(), self.assignment.describe());
        }
    }

    fn post_rebalance(&self, _consumer: &BaseConsumer<Self>, rebalance: &Rebalance<'_>) {
        if let Rebalance::Assign(tpl) = rebalance {
            let elements = tpl.elements();
            for e in &elements {
                self.tracker.remove(e.topic(), e.partition());
                self.tracker.get(e.topic(), e.partition());
            }
            self.metrics.partitions_assigned.add(elements.len() as i64);
            self.metrics.rebalances.with_label_values(&["assign"]).inc();
            self.assignment.add(elements.iter().map(|e| (e.topic(), e.partition())));
            self.joined.store(true, Ordering::SeqCst);
            tracing::info!("assigned {} partitions; assignment now: {}", elements.len(), self.assignment.describe());
        }
    }

    fn commit_callback(&self, result: KafkaResult<()>, _offsets: &TopicPartitionList) {
        if let Err(e) = result {
            tracing::debug!("offset commit: {e}");
        }
    }
}

/// A synchronous commit of explicit offsets, counted by result.
pub fn commit_counted<C: Consumer<SourceContext>>(consumer: &C, tpl: &TopicPartitionList, metrics: &Metrics) -> bool {
    match consumer.commit(tpl, CommitMode::Sync) {
        Ok(()) => {
            metrics.offset_commits.with_label_values(&["ok"]).inc();
            true
        }
        Err(e) => {
            metrics.offset_commits.with_label_values(&["error"]).inc();
            tracing::warn!("offset commit failed: {e}");
            false
        }
    }
}

/// The watermarks of every tracked partition, as a commit list.
pub fn watermarks(tracker: &Tracker) -> TopicPartitionList {
    let mut tpl = TopicPartitionList::new();
    for t in tracker.all() {
        if let Some(w) = t.watermark() {
            let _ = tpl.add_partition_offset(&t.topic, t.partition, Offset::Offset(w));
        }
    }
    tpl
}
