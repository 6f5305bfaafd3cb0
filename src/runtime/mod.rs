//! The service runtime: the record pipeline, offset watermarks, acknowledgement tickets, the model and rules view seams, the learner and its label log, resolving id-only labels, hot reload (watcher, SIGHUP, admin), shutdown, and `Service` that wires them from settings.

pub mod ack;
pub mod assignment;
pub mod drift_observer;
pub mod error;
pub mod label_log;
pub mod learner;
pub mod model_view;
pub mod monitor;
pub mod pipeline;
pub mod reload;
pub mod resolver;
pub mod router;
pub mod rules_view;
pub mod service;
pub mod shutdown;
pub mod startup;
pub mod status;
pub mod watch;
pub mod watermark;

pub use error::ServiceError;
pub use service::{Readiness, RunReport, Service};

/// Wall-clock milliseconds since the Unix epoch (the unit of Kafka timestamps).
pub fn now_ms() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_millis() as i64).unwrap_or(0)
}
