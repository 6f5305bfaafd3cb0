//! The label log as the learner reads it: a trait over the learned-label topic (Kafka, by assignment), a followed file, or an in-process channel, with seeking to snapshot offsets and end-of-partition events for catching up.

use std::collections::BTreeMap;
use std::time::Duration;

use crate::model::snapshot::LabelOffsets;

/// One label event as read from the log.
#[derive(Debug, Clone, PartialEq)]
pub struct LabelMsg {
    pub topic: String,
    pub partition: i32,
    pub offset: i64,
    pub key: Option<Vec<u8>>,
    pub payload: Vec<u8>,
    /// The log's timestamp of the event (Kafka CreateTime/LogAppendTime, read time for files), Unix ms.
    pub timestamp_ms: Option<i64>,
}

/// What one poll of the log found.
#[derive(Debug, Clone, PartialEq)]
pub enum LogEvent {
    Message(LabelMsg),
    /// A partition has no more events for now: the reader is at its end.
    End { topic: String, partition: i32 },
    /// Nothing within the timeout.
    Idle,
}

/// Why the log cannot be read; the learner logs it, counts it and keeps polling.
#[derive(Debug, thiserror::Error)]
pub enum LabelLogError {
    #[error("label log {what}: {reason}")]
    Read { what: String, reason: String },
    #[error("label topic {0} does not exist")]
    MissingTopic(String),
}

/// A readable label log. Offsets are per (topic, partition), increasing.
pub trait LabelLog: Send {
    /// Wait at most `timeout` for the next event.
    fn poll(&mut self, timeout: Duration) -> Result<LogEvent, LabelLogError>;
    /// Read every partition from `offsets` (the next offset to read); partitions
    /// without an entry from their beginning. Every partition reports `End`
    /// again once it is read up to its end.
    fn seek(&mut self, offsets: &LabelOffsets) -> Result<(), LabelLogError>;
    /// The partitions being read.
    fn partitions(&self) -> Vec<(String, i32)>;
    /// For logs and metrics.
    fn describe(&self) -> String;
}

/// An in-process label log: events are sent on a channel and numbered in
/// arrival order on one partition. Used by the demo and tests.
pub struct ChannelLabelLog {
    topic: String,
    rx: std::sync::mpsc::Receiver<Vec<u8>>,
    /// Everything received, so a seek can replay it (an in-process log is small).
    kept: Vec<Vec<u8>>,
    next: i64,
    ended: bool,
    closed: bool,
}

impl ChannelLabelLog {
    pub fn new(topic: &str) -> (std::sync::mpsc::Sender<Vec<u8>>, ChannelLabelLog) {
        let (tx, rx) = std::sync::mpsc::channel();
        (tx, ChannelLabelLog { topic: topic.to_string(), rx, kept: Vec::new(), next: 0, ended: false, closed: false })
    }

    fn message(&mut self, offset: i64) -> LogEvent {
        self.next = offset + 1;
        LogEvent::Message(LabelMsg {
            topic: self.topic.clone(),
            partition: 0,
            offset,
            key: None,
            payload: self.kept[offset as usize].clone(),
            timestamp_ms: Some(crate::clock::unix_millis()),
        })
    }
}

impl LabelLog for ChannelLabelLog {
    fn poll(&mut self, timeout: Duration) -> Result<LogEvent, LabelLogError> {
        use std::sync::mpsc::{RecvTimeoutError, TryRecvError};
        if (self.next as usize) < self.kept.len() {
            return Ok(self.message(self.next));
        }
        let got = match self.rx.try_recv() {
            Ok(p) => Some(p),
            Err(e) => {
                self.closed |= e == TryRecvError::Disconnected;
                if !self.ended {
                    self.ended = true;
                    return Ok(LogEvent::End { topic: self.topic.clone(), partition: 0 });
                }
                if self.closed {
                    std::thread::sleep(timeout);
                    None
                } else {
                    match self.rx.recv_timeout(timeout) {
                        Ok(p) => Some(p),
                        Err(e) => {
                            self.closed |= e == RecvTimeoutError::Disconnected;
                            None
                        }
                    }
                }
            }
        };
        Ok(match got {
            Some(p) => {
                self.kept.push(p);
                self.ended = false;
                self.message(self.kept.len() as i64 - 1)
            }
            None => LogEvent::Idle,
        })
    }

    fn seek(&mut self, offsets: &LabelOffsets) -> Result<(), LabelLogError> {
        self.next = offsets.get(&self.topic).and_then(|p| p.get(&0)).copied().unwrap_or(0).max(0);
        self.ended = false;
        Ok(())
    }

    fn partitions(&self) -> Vec<(String, i32)> {
        vec![(self.topic.clone(), 0)]
    }

    fn describe(&self) -> String {
        format!("in-process label log {}", self.topic)
    }
}

/// Offsets as a flat list, for logs.
pub fn describe_offsets(o: &LabelOffsets) -> String {
    let flat: BTreeMap<String, i64> =
        o.iter().flat_map(|(t, ps)| ps.iter().map(move |(p, n)| (format!("{t}/{p}"), *n))).collect();
    format!("{flat:?}")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn drain(log: &mut ChannelLabelLog) -> (Vec<(i64, Vec<u8>)>, bool) {
        let mut got = Vec::new();
        loop {
            match log.poll(Duration::from_millis(5)).unwrap() {
                LogEvent::Message(m) => got.push((m.offset, m.payload)),
                LogEvent::End { .. } => return (got, true),
                LogEvent::Idle => return (got, false),
            }
        }
    }

    #[test]
    fn channel_log_numbers_events_reports_end_and_replays_after_seek() {
        let (tx, mut log) = ChannelLabelLog::new("labels");
        tx.send(b"a".to_vec()).unwrap();
        tx.send(b"b".to_vec()).unwrap();
        let (got, ended) = drain(&mut log);
        assert_eq!(got, vec![(0, b"a".to_vec()), (1, b"b".to_vec())]);
        assert!(ended, "an End follows once the channel is empty");
        assert_eq!(log.poll(Duration::from_millis(1)).unwrap(), LogEvent::Idle);
        tx.send(b"c".to_vec()).unwrap();
        let (got, _) = drain(&mut log);
        assert_eq!(got, vec![(2, b"c".to_vec())]);
        log.seek(&LabelOffsets::from([("labels".to_string(), BTreeMap::from([(0, 1)]))])).unwrap();
        let (got, ended) = drain(&mut log);
        assert_eq!(got, vec![(1, b"b".to_vec()), (2, b"c".to_vec())]);
        assert!(ended);
    }
}
