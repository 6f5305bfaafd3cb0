//! Edges: reading and writing records. `dataset` and `record` are synchronous (offline commands and codecs); the streaming sources and sinks build on them.
//!
//! - `codec`: bytes → fields (JSON, text) or a dead-letter reason;
//! - `message`: the inbound/outgoing record shapes; `headers`: header names and reasons;
//! - `label_file`: a label log in a followed file (the learner's non-Kafka label source);
//! - `lines`: stdin/file sources and stdout/file sinks; `sink`: the sink a service writes to;
//! - `kafka/`: client config, consumer with rebalance handling, producer sink, topic lookup.
//!
//! Sinks acknowledge through `runtime::ack::AckTicket`, the one runtime type the edges know.

pub mod codec;
pub mod dataset;
pub mod headers;
pub mod kafka;
pub mod label_file;
pub mod lines;
pub mod message;
pub mod record;
pub mod sink;
