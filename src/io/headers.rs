//! Header names and dead-letter reason values written on every output, in one place.

/// The decided class (decisions and reviews).
pub const CLASS: &str = "sieveline.class";
/// The posterior of the decided class, printed with up to 9 decimals.
pub const CONFIDENCE: &str = "sieveline.confidence";
/// `model`, `rule:<id>` or `none`.
pub const DECIDED_BY: &str = "sieveline.decided_by";
/// Why a decision went to review (`low_confidence`, `low_margin`, ...).
pub const REVIEW_REASON: &str = "sieveline.review_reason";
/// Why a record was dead-lettered: one of the `REASON_*` values.
pub const REASON: &str = "sieveline.reason";
/// Free-text detail of a dead letter (never used as a metric label).
pub const ERROR: &str = "sieveline.error";
/// Where the input came from: topic (or file / `stdin`), partition, offset (line index for files).
pub const SOURCE_TOPIC: &str = "sieveline.source.topic";
pub const SOURCE_PARTITION: &str = "sieveline.source.partition";
pub const SOURCE_OFFSET: &str = "sieveline.source.offset";

pub const REASON_BAD_JSON: &str = "bad json";
pub const REASON_INVALID_UTF8: &str = "invalid utf-8";
pub const REASON_MISSING_TEXT: &str = "missing text field";
pub const REASON_OVERSIZE: &str = "oversize";
pub const REASON_UNKNOWN_DESTINATION: &str = "unknown destination";

/// Every dead-letter reason, for metrics initialisation and docs.
pub const REASONS: &[&str] =
    &[REASON_BAD_JSON, REASON_INVALID_UTF8, REASON_MISSING_TEXT, REASON_OVERSIZE, REASON_UNKNOWN_DESTINATION];
