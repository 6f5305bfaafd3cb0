//! sieveline: classify text records as they stream through a message queue.
//!
//! Code map (pure core first; only `io`, `runtime` and `admin` do async I/O):
//! - [`settings`]: defaults + file + environment → one validated `Settings`;
//! - [`text`]: the analyzer — tokenise, collapse volatile terms, fold, weight;
//! - [`features`]: term → row, by an interned vocabulary or feature hashing;
//! - [`model`]: multinomial / complement Naive Bayes in log space, snapshots;
//! - [`decide`]: scores → `Decision`, the review policy;
//! - [`eval`]: metrics, folds, cross-validated tuning, reports;
//! - [`io`]: record codecs and file readers (offline and streaming edges);
//! - [`commands`]: one file per subcommand; [`cli`]: the flag definitions;
//! - [`error`]: typed errors per layer; [`clock`]: timestamps for metadata only.

pub mod cli;
pub mod clock;
pub mod commands;
pub mod decide;
pub mod error;
pub mod eval;
pub mod features;
pub mod io;
pub mod model;
pub mod settings;
pub mod text;
