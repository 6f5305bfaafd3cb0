//! The record shapes at the edges: an input as read (borrowed from the source) and an output ready for a sink.

use std::borrow::Cow;
use std::sync::Arc;

/// One input record, borrowed from whatever read it.
#[derive(Debug, Clone)]
pub struct Inbound<'a> {
    /// Kafka topic, or the file path, or `stdin`.
    pub topic: &'a str,
    pub partition: i32,
    /// Kafka offset, or the 0-based line index.
    pub offset: i64,
    pub key: Option<&'a [u8]>,
    pub payload: Option<&'a [u8]>,
    pub headers: Vec<(&'a str, &'a [u8])>,
    /// Milliseconds since the epoch: Kafka CreateTime / LogAppendTime, or read time.
    pub timestamp_ms: Option<i64>,
}

/// What an output is, for metrics and sinks.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum OutKind {
    Decision { class: Arc<str> },
    Review { class: Arc<str> },
    DeadLetter { reason: &'static str },
    /// An id-only label resolved into a complete event, on the learned-label topic.
    Label,
}

/// One output record, owned, ready for a sink.
#[derive(Debug, Clone)]
pub struct Outgoing {
    pub topic: String,
    pub key: Option<Vec<u8>>,
    pub payload: Vec<u8>,
    pub headers: Vec<(Cow<'static, str>, Vec<u8>)>,
    pub kind: OutKind,
}

impl Outgoing {
    pub fn header(&self, name: &str) -> Option<&[u8]> {
        self.headers.iter().find(|(n, _)| n == name).map(|(_, v)| v.as_slice())
    }
}
