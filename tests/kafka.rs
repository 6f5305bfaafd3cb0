//! Integration tests against a real Kafka broker (`SIEVELINE_TEST_BROKERS`; they fail without one), in one test binary: each module is one concern, opening with what it guards.

mod common;
mod deploy_support;
mod support;

mod service_kafka;
mod learning_kafka;
mod scale_out;
mod check_config;
mod deploy_docker;
mod demo_kafka;
