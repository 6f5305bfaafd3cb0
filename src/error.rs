//! Typed errors of the library, one enum per layer; the binary adds context with anyhow and maps them to exit codes.

use thiserror::Error;

/// Settings could not be read, merged or validated.
#[derive(Debug, Error)]
pub enum SettingsError {
    #[error("cannot read settings file {path}: {reason}")]
    Read { path: String, reason: String },
    #[error("settings file {path} is not valid TOML: {reason}")]
    Syntax { path: String, reason: String },
    #[error("cannot merge settings: {0}")]
    Merge(String),
    #[error("settings do not have the expected shape: {0}")]
    Shape(String),
    #[error("setting {key} = {value:?} is not allowed: expected {allowed}")]
    Invalid { key: String, value: String, allowed: String },
}

/// A model operation was refused.
#[derive(Debug, Error, PartialEq)]
pub enum ModelError {
    #[error("unknown class {0:?}")]
    UnknownClass(String),
    #[error("the model needs at least one class")]
    NoClasses,
    #[error("class {0:?} is listed twice")]
    DuplicateClass(String),
    #[error("weight {0} is not allowed: expected a multiple of 1/16 (0.0625) from 0.0625 to 64")]
    BadWeight(f64),
    #[error("unlearn would make a count negative for class {class:?}: the record was not learned as that class")]
    NotLearned { class: String },
    #[error("given prior for class {0:?} is missing")]
    MissingPrior(String),
}

/// A snapshot file could not be written or was refused at load.
#[derive(Debug, Error)]
pub enum SnapshotError {
    #[error("cannot read model file {path}: {reason}")]
    Io { path: String, reason: String },
    #[error("{path} is not a sieveline model file (bad magic bytes)")]
    NotASnapshot { path: String },
    #[error("{path} has snapshot format version {found}; this build reads version {expected}")]
    WrongVersion { path: String, found: u32, expected: u32 },
    #[error("{path} is truncated: {what}")]
    Truncated { path: String, what: String },
    #[error("{path} is corrupt: checksum mismatch (stored {stored}, computed {computed})")]
    Checksum { path: String, stored: String, computed: String },
    #[error("{path} is corrupt: {what}")]
    Corrupt { path: String, what: String },
    #[error(
        "{path} was built with other analyzer settings (fingerprint {model} vs {current}); differing: {differences}"
    )]
    AnalyzerMismatch { path: String, model: String, current: String, differences: String },
}

/// A row of a labelled input file could not be used.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum RowError {
    #[error("line {line}: not valid UTF-8")]
    InvalidUtf8 { line: u64 },
    #[error("line {line}: malformed {format}: {reason}")]
    Malformed { line: u64, format: &'static str, reason: String },
    #[error("line {line}: missing label field {field:?}")]
    MissingLabel { line: u64, field: String },
    #[error("line {line}: empty label")]
    EmptyLabel { line: u64 },
    #[error("line {line}: none of the text fields {fields:?} is present")]
    MissingText { line: u64, fields: Vec<String> },
    #[error("line {line}: the text is empty")]
    EmptyText { line: u64 },
}

impl RowError {
    /// A short, stable reason string for counters and dead letters.
    pub fn reason(&self) -> &'static str {
        match self {
            RowError::InvalidUtf8 { .. } => "invalid utf-8",
            RowError::Malformed { .. } => "malformed",
            RowError::MissingLabel { .. } => "missing label",
            RowError::EmptyLabel { .. } => "empty label",
            RowError::MissingText { .. } => "missing text field",
            RowError::EmptyText { .. } => "empty text",
        }
    }
}

/// An input file as a whole could not be read.
#[derive(Debug, Error)]
pub enum DatasetError {
    #[error("cannot read {path}: {reason}")]
    Io { path: String, reason: String },
    #[error("{path}: {reason}")]
    Header { path: String, reason: String },
    #[error("{path}: unknown field {field:?}; the file has: {available}")]
    UnknownField { path: String, field: String, available: String },
    #[error("{path}: {error} (--strict makes malformed rows fatal)")]
    Strict { path: String, error: RowError },
    #[error("{path}: no usable rows")]
    Empty { path: String },
}
