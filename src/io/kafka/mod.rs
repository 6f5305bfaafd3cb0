//! Kafka edges (rdkafka): client configuration from settings, the consumer with its rebalance handling, the producer sink with delivery acknowledgements, destination topic lookup, and the pre-deploy cluster check.

pub mod check;
pub mod config;
pub mod consumer;
pub mod producer;
pub mod topics;
