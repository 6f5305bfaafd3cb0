//! The service runtime: the record pipeline, offset watermarks, acknowledgement tickets, the model view seam, the learner and its label log, resolving id-only labels, shutdown, and `Service` that wires them from settings.

pub mod ack;
pub mod assignment;
pub mod drift_observer;
pub mod error;
pub mod label_log;
pub mod learner;
pub mod model_view;
pub mod monitor;
pub mod pipeline;
pub mod resolver;
pub mod router;
pub mod service;
pub mod shutdown;
pub mod startup;
pub mod status;
pub mod watermark;

pub use error::ServiceError;
pub use service::{Readiness, RunReport, Service};

/// Wall-clock milliseconds since the Unix epoch (the unit of Kafka timestamps).
pub fn now_ms() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_millis() as i64).unwrap_or(0)
}
