//! Why the service could not start or had to stop.

use thiserror::Error;

use crate::error::SnapshotError;
use crate::rules::RulesError;
use crate::runtime::watch::WatchError;

#[derive(Debug, Error)]
pub enum ServiceError {
    #[error("service.model is empty: give a model snapshot with --model FILE or service.model")]
    NoModel,
    #[error("cannot load the model")]
    Model(#[source] SnapshotError),
    #[error("cannot load the rules file (rules.path)")]
    Rules(#[source] RulesError),
    #[error(transparent)]
    Watch(#[from] WatchError),
    #[error("cannot install the SIGHUP handler (it reloads the model and the rules): {0}")]
    Hangup(std::io::Error),
    #[error("analyzer patterns do not compile: {0}")]
    Analyzer(String),
    #[error("kafka {what}: {source}")]
    Kafka { what: String, source: rdkafka::error::KafkaError },
    #[error("{what}: {source}")]
    Io { what: String, source: std::io::Error },
    #[error("admin endpoint cannot bind {addr}: {source}")]
    AdminBind { addr: String, source: std::io::Error },
    #[error("topic {topic} ({role}) does not exist; create it or set routing.create_missing_topics = true")]
    MissingTopic { topic: String, role: &'static str },
    #[error("learner: {0}")]
    Learner(String),
}
