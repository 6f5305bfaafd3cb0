//! Kafka edges (rdkafka): client configuration from settings, the consumer with its rebalance handling, the producer sink with delivery acknowledgements, and destination topic lookup.

pub mod config;
pub mod consumer;
pub mod lag;
pub mod producer;
pub mod topics;
