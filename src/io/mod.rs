//! Edges: reading and writing records. `dataset` and `record` are synchronous (offline commands and codecs); the streaming sources and sinks build on them.

pub mod dataset;
pub mod record;
