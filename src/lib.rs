//! sieveline: classify text records as they stream through a message queue.
//!
//! Code map (pure core first; only `io`, `runtime` and `admin` do async I/O):
//! - [`settings`]: defaults + file + environment → one validated `Settings`;
//! - [`text`]: the analyzer — tokenise, collapse volatile terms, fold, weight;
//! - [`features`]: term → row, by an interned vocabulary or feature hashing;
//! - [`model`]: multinomial / complement Naive Bayes in log space, snapshots;
//! - [`rules`]: hand-written rules — file format, validation, one term index, blending with the model;
//! - [`decide`]: scores → `Decision`, the review policy;
//! - [`eval`]: metrics, folds, cross-validated tuning, reports;
//! - [`demo`]: the invented demo scenario's seeded generator (tickets, logs, labels);
//! - [`drift`]: drift and health statistics — class-mix PSI and Jensen–Shannon divergence, unknown tokens, confidence, feedback accuracy, Page–Hinkley;
//! - [`io`]: record codecs and file readers (offline and streaming edges);
//! - [`runtime`]: the service — pipeline, offset watermarks, acks, model view seam, shutdown;
//! - [`admin`]: the admin HTTP endpoint; [`metrics`]: every metric name in one place;
//! - [`commands`]: one file per subcommand; [`cli`]: the flag definitions;
//! - [`error`]: typed errors per layer; [`clock`]: timestamps for metadata only.

pub mod admin;
pub mod cli;
pub mod clock;
pub mod commands;
pub mod decide;
pub mod demo;
pub mod drift;
pub mod error;
pub mod eval;
pub mod features;
pub mod io;
pub mod learn;
pub mod metrics;
pub mod model;
pub mod rules;
pub mod runtime;
pub mod settings;
pub mod text;
