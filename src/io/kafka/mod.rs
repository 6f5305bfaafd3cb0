//! Kafka edges (rdkafka): client configuration from settings, the consumer with its rebalance handling, the producer sink with delivery acknowledgements, and destination topic lookup, and the learned-label topic read by assignment.

pub mod config;
pub mod consumer;
pub mod label_log;
pub mod producer;
pub mod topics;
