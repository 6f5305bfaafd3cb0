//! Kafka edges (rdkafka): client configuration from settings, the consumer with its rebalance handling, the producer sink with delivery acknowledgements, destination topic lookup, the learned-label topic read by assignment, and the pre-deploy cluster check.

pub mod check;
pub mod config;
pub mod consumer;
pub mod label_log;
pub mod lag;
pub mod producer;
pub mod topics;
