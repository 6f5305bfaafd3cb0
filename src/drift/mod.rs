//! Drift and health statistics, pure part: sliding windows by record count, distances between class mixes, feedback accuracy and change detection. No I/O, no clocks; the service feeds them and exports the numbers (`src/runtime/monitor.rs`).
//!
//! - `divergence`: population stability index (PSI) and Jensen–Shannon divergence;
//! - `window`: the last N decisions with O(1) updates (class, confidence, unknown tokens, review);
//! - `reference`: the class mix compared against (training priors, a pinned baseline, or the trailing records);
//! - `tracker`: `DecisionTracker`, the decision side owned by the record loop, and its summary;
//! - `feedback`: prequential accuracy over the last N labels, label delay, change detection;
//! - `page_hinkley`: the Page–Hinkley test;
//! - `reviews`: the bounded ring of recently reviewed records for the status page;
//! - `oov`: unknown-token counts of a record from the model's view.
//!
//! Thresholds and where each value comes from are in `docs/drift.md`.

pub mod divergence;
pub mod feedback;
pub mod oov;
pub mod page_hinkley;
pub mod reference;
pub mod reviews;
pub mod tracker;
pub mod window;

pub use divergence::{js_divergence_bits, psi, DEFAULT_PSI_FLOOR};
pub use feedback::{ClassAccuracy, FeedbackMonitor, FeedbackOutcome, FeedbackParams, FeedbackSummary};
pub use page_hinkley::{PageHinkley, PageHinkleyParams};
pub use reference::ReferenceKind;
pub use reviews::{ReviewRing, ReviewedRecord};
pub use tracker::{DecisionParams, DecisionSummary, DecisionTracker};
pub use window::{DecisionWindow, Observation};
