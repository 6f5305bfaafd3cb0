//! The learned-label topic as a label log: every partition read by assignment (no consumer group), from the offsets a snapshot records, with end-of-partition events for catching up and new partitions picked up as they appear.

use std::collections::{BTreeMap, BTreeSet, VecDeque};
use std::time::{Duration, Instant};

use rdkafka::consumer::{BaseConsumer, Consumer, DefaultConsumerContext};
use rdkafka::error::KafkaError;
use rdkafka::message::Message;
use rdkafka::{Offset, TopicPartitionList};

use super::config::label_consumer_config;
use crate::model::snapshot::LabelOffsets;
use crate::runtime::label_log::{LabelLog, LabelLogError, LabelMsg, LogEvent};
use crate::settings::Settings;

const METADATA_TIMEOUT: Duration = Duration::from_secs(10);
/// How often partitions not yet reported at their end are checked against their high watermark
/// (librdkafka's end-of-partition event does not come for a partition whose tail holds no message).
const END_CHECK: Duration = Duration::from_millis(500);

pub struct KafkaLabelLog {
    consumer: BaseConsumer<DefaultConsumerContext>,
    topic: String,
    partitions: i32,
    /// Next offset to read per partition; `None` until known (read from the beginning).
    next: BTreeMap<i32, Option<i64>>,
    /// Partitions reported at their end since they last delivered a message or were sought.
    ended: BTreeSet<i32>,
    queued_ends: VecDeque<i32>,
    refresh: Duration,
    last_refresh: Instant,
    last_end_check: Instant,
}

impl KafkaLabelLog {
    /// Connect and learn the topic's partitions; nothing is read until `seek`.
    pub fn new(settings: &Settings) -> Result<KafkaLabelLog, LabelLogError> {
        let topic = settings.learning.label_topic.clone();
        let consumer: BaseConsumer<DefaultConsumerContext> = label_consumer_config(settings)
            .create()
            .map_err(|e| LabelLogError::Read { what: "create the label consumer".into(), reason: e.to_string() })?;
        let partitions = partition_count(&consumer, &topic)?;
        if partitions == 0 {
            return Err(LabelLogError::MissingTopic(topic));
        }
        Ok(KafkaLabelLog {
            consumer,
            topic,
            partitions,
            next: BTreeMap::new(),
            ended: BTreeSet::new(),
            queued_ends: VecDeque::new(),
            refresh: Duration::from_millis(settings.learning.partition_refresh_ms),
            last_refresh: Instant::now(),
            last_end_check: Instant::now(),
        })
    }

    /// Partitions added to the topic since the last look are read from their beginning.
    fn refresh_partitions(&mut self) {
        self.last_refresh = Instant::now();
        let Ok(n) = partition_count(&self.consumer, &self.topic) else { return };
        if n <= self.partitions {
            return;
        }
        let mut tpl = TopicPartitionList::new();
        for p in self.partitions..n {
            let _ = tpl.add_partition_offset(&self.topic, p, Offset::Beginning);
            self.next.insert(p, None);
        }
        match self.consumer.incremental_assign(&tpl) {
            Ok(()) => {
                tracing::info!("label topic {} grew from {} to {n} partitions", self.topic, self.partitions);
                self.partitions = n;
            }
            Err(e) => tracing::warn!("cannot assign new partitions of {}: {e}", self.topic),
        }
    }

    /// Report partitions whose next offset is at their high watermark as ended.
    fn check_ends(&mut self) {
        self.last_end_check = Instant::now();
        let open: Vec<i32> = (0..self.partitions).filter(|p| !self.ended.contains(p)).collect();
        for p in open {
            let Ok((low, high)) = self.consumer.fetch_watermarks(&self.topic, p, Duration::from_secs(2)) else { continue };
            let next = self.next.get(&p).copied().flatten().unwrap_or(low);
            if next >= high && self.ended.insert(p) {
                self.queued_ends.push_back(p);
            }
        }
    }
}

fn partition_count(c: &BaseConsumer<DefaultConsumerContext>, topic: &str) -> Result<i32, LabelLogError> {
    let md = c
        .fetch_metadata(Some(topic), METADATA_TIMEOUT)
        .map_err(|e| LabelLogError::Read { what: format!("metadata of {topic}"), reason: e.to_string() })?;
    match md.topics().iter().find(|t| t.name() == topic) {
        Some(t) if t.error().is_none() => Ok(t.partitions().len() as i32),
        _ => Err(LabelLogError::MissingTopic(topic.to_string())),
    }
}

impl LabelLog for KafkaLabelLog {
    fn poll(&mut self, timeout: Duration) -> Result<LogEvent, LabelLogError> {
        if let Some(p) = self.queued_ends.pop_front() {
            return Ok(LogEvent::End { topic: self.topic.clone(), partition: p });
        }
        if self.last_refresh.elapsed() >= self.refresh {
            self.refresh_partitions();
        }
        if self.ended.len() < self.partitions as usize && self.last_end_check.elapsed() >= END_CHECK {
            self.check_ends();
            if let Some(p) = self.queued_ends.pop_front() {
                return Ok(LogEvent::End { topic: self.topic.clone(), partition: p });
            }
        }
        match self.consumer.poll(timeout) {
            None => Ok(LogEvent::Idle),
            Some(Ok(m)) => {
                let p = m.partition();
                self.next.insert(p, Some(m.offset() + 1));
                self.ended.remove(&p);
                Ok(LogEvent::Message(LabelMsg {
                    topic: m.topic().to_string(),
                    partition: p,
                    offset: m.offset(),
                    key: m.key().map(<[u8]>::to_vec),
                    payload: m.payload().unwrap_or_default().to_vec(),
                    timestamp_ms: m.timestamp().to_millis(),
                }))
            }
            Some(Err(KafkaError::PartitionEOF(p))) => {
                if self.ended.insert(p) {
                    Ok(LogEvent::End { topic: self.topic.clone(), partition: p })
                } else {
                    Ok(LogEvent::Idle)
                }
            }
            Some(Err(e)) => Err(LabelLogError::Read { what: format!("consume {}", self.topic), reason: e.to_string() }),
        }
    }

    fn seek(&mut self, offsets: &LabelOffsets) -> Result<(), LabelLogError> {
        if let Ok(n) = partition_count(&self.consumer, &self.topic) {
            self.partitions = self.partitions.max(n);
        }
        let from = offsets.get(&self.topic);
        let mut tpl = TopicPartitionList::new();
        self.next.clear();
        for p in 0..self.partitions {
            let start = from.and_then(|ps| ps.get(&p)).copied();
            let offset = start.map_or(Offset::Beginning, Offset::Offset);
            tpl.add_partition_offset(&self.topic, p, offset)
                .map_err(|e| LabelLogError::Read { what: "build the assignment".into(), reason: e.to_string() })?;
            self.next.insert(p, start);
        }
        self.consumer
            .assign(&tpl)
            .map_err(|e| LabelLogError::Read { what: format!("assign {}", self.topic), reason: e.to_string() })?;
        self.ended.clear();
        self.queued_ends.clear();
        self.last_end_check = Instant::now();
        Ok(())
    }

    fn partitions(&self) -> Vec<(String, i32)> {
        (0..self.partitions).map(|p| (self.topic.clone(), p)).collect()
    }

    fn describe(&self) -> String {
        format!("label topic {} ({} partitions)", self.topic, self.partitions)
    }
}

/// The current end (high watermark) of every partition of the learned-label
/// topic: the offsets a model trained offline records when its training data
/// already holds every label in the log.
pub fn end_offsets(settings: &Settings) -> Result<LabelOffsets, LabelLogError> {
    let topic = &settings.learning.label_topic;
    let consumer: BaseConsumer<DefaultConsumerContext> = label_consumer_config(settings)
        .create()
        .map_err(|e| LabelLogError::Read { what: "create the label consumer".into(), reason: e.to_string() })?;
    let n = partition_count(&consumer, topic)?;
    let mut parts = BTreeMap::new();
    for p in 0..n {
        let (_, high) = consumer
            .fetch_watermarks(topic, p, METADATA_TIMEOUT)
            .map_err(|e| LabelLogError::Read { what: format!("watermarks of {topic}/{p}"), reason: e.to_string() })?;
        parts.insert(p, high);
    }
    Ok(LabelOffsets::from([(topic.clone(), parts)]))
}
