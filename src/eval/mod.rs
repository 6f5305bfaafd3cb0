//! Offline evaluation: metrics (accuracy, macro-F1, per-class P/R/F1, confusion), seeded splits and folds, and cross-validated tuning.

pub mod cv;
pub mod folds;
pub mod metrics;
pub mod report;

pub use metrics::{ClassMetrics, Confusion, Metrics};
