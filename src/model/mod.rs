//! The multinomial (and complement) Naive Bayes model: counts, log-space scoring, explanations and the snapshot file.
//!
//! - `params`: checked hyper-parameters (kind, α, priors);
//! - `nb`: the counts, `learn`/`unlearn`, the row cache of log weights;
//! - `rows`: per-row storage in shared segments, a row copied on its first write after a clone;
//! - `score`: joint log likelihoods, log-sum-exp posteriors, margin;
//! - `explain`: the terms that contributed most to a decision;
//! - `snapshot`: the versioned, checksummed, atomically written model file.

pub mod explain;
pub mod nb;
pub mod params;
pub mod rows;
pub mod score;
pub mod snapshot;

#[cfg(test)]
mod clone_tests;

pub use nb::{LearnOutcome, Model};
pub use params::NbParams;
pub use rows::Sharing;
pub use score::{ScoreScratch, Scored};
