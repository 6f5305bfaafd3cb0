//! Simulated reviewers: who labels which record, how many records later, how often wrongly, and the lead's later corrections.
//!
//! Rules (asserted in tests):
//! - each record is labelled at most once by a reviewer, with the phase's
//!   `label_share` chance; the reviewer is drawn by [`ReviewerProfile::weight`];
//! - the label arrives `delay` records after the record, `delay` uniform in
//!   the reviewer's inclusive range; `at` is the index of the record after
//!   which the event is published (so `at = index + delay`);
//! - with the reviewer's `error_rate` the class is wrong: a neighbouring class
//!   with chance [`NEIGHBOUR_MISTAKE`], else any other class;
//! - a wrong label is corrected by the lead with chance [`CORRECTION_SHARE`],
//!   [`CORRECTION_DELAY`] records after the wrong label arrived; the
//!   correction carries the true class and `replaces` = the wrong class;
//! - events that would arrive after the last record are not emitted (so a
//!   late wrong label may stay uncorrected);
//! - events are ordered by `at`, then by the record index, a correction after
//!   the label it corrects.

use serde::Serialize;

use super::compose::{between, chance, pick, weighted};
use super::script::{self, Boundaries};
use super::vocabulary::REVIEWER_NAMES;
use crate::eval::folds::SplitMix64;

/// A reviewer's habits; `name` indexes [`REVIEWER_NAMES`].
#[derive(Debug, Clone, Copy, Serialize)]
pub struct ReviewerProfile {
    pub name: usize,
    pub weight: f64,
    pub error_rate: f64,
    pub delay: (u64, u64),
}

/// The labelling reviewers (the lead, who only corrects, is [`LEAD`]).
pub const REVIEWERS: [ReviewerProfile; 4] = [
    ReviewerProfile {
        name: 0,
        weight: 0.35,
        error_rate: 0.04,
        delay: (10, 120),
    },
    ReviewerProfile {
        name: 1,
        weight: 0.30,
        error_rate: 0.06,
        delay: (30, 300),
    },
    ReviewerProfile {
        name: 2,
        weight: 0.20,
        error_rate: 0.12,
        delay: (5, 60),
    },
    ReviewerProfile {
        name: 3,
        weight: 0.15,
        error_rate: 0.05,
        delay: (200, 800),
    },
];
pub const LEAD: usize = 4;
pub const CORRECTION_SHARE: f64 = 0.8;
pub const CORRECTION_DELAY: (u64, u64) = (100, 1000);
pub const NEIGHBOUR_MISTAKE: f64 = 0.75;

/// The expected share of wrong first labels, Σ weight × error rate / Σ weight.
pub fn expected_error_rate() -> f64 {
    let w: f64 = REVIEWERS.iter().map(|r| r.weight).sum();
    REVIEWERS
        .iter()
        .map(|r| r.weight * r.error_rate)
        .sum::<f64>()
        / w
}

pub fn reviewer_name(profile_name: usize) -> &'static str {
    REVIEWER_NAMES[profile_name]
}

/// One label event before it is given its wire shape.
#[derive(Debug, Clone, PartialEq)]
pub struct Label {
    /// Index of the labelled record in its stream.
    pub index: usize,
    pub class: &'static str,
    pub replaces: Option<&'static str>,
    pub at: usize,
    pub reviewer: &'static str,
}

/// Labels for a stream whose record `i` has true class `truth[i]`.
/// `neighbours(class)` gives the classes a reviewer confuses it with.
pub fn schedule(
    rng: &mut SplitMix64,
    truth: &[&'static str],
    classes: &[&'static str],
    neighbours: impl Fn(&str) -> &'static [&'static str],
    bounds: &Boundaries,
) -> Vec<Label> {
    let n = truth.len();
    let weights: Vec<f64> = REVIEWERS.iter().map(|r| r.weight).collect();
    let mut out: Vec<(usize, usize, u8, Label)> = Vec::new();
    for (index, &class) in truth.iter().enumerate() {
        let p = script::phase(bounds.phase_of(index));
        if !chance(rng, p.label_share) {
            continue;
        }
        let r = REVIEWERS[weighted(rng, &weights)];
        let at = index + between(rng, r.delay.0, r.delay.1) as usize;
        let wrong = chance(rng, r.error_rate);
        let given = if wrong {
            let near = neighbours(class);
            if !near.is_empty() && chance(rng, NEIGHBOUR_MISTAKE) {
                pick(rng, near)
            } else {
                let others: Vec<&'static str> =
                    classes.iter().copied().filter(|c| *c != class).collect();
                pick(rng, &others)
            }
        } else {
            class
        };
        let corrected_at = (wrong && chance(rng, CORRECTION_SHARE))
            .then(|| at + between(rng, CORRECTION_DELAY.0, CORRECTION_DELAY.1) as usize);
        if at >= n {
            continue;
        }
        out.push((
            at,
            index,
            0,
            Label {
                index,
                class: given,
                replaces: None,
                at,
                reviewer: reviewer_name(r.name),
            },
        ));
        if let Some(c) = corrected_at.filter(|c| *c < n) {
            out.push((
                c,
                index,
                1,
                Label {
                    index,
                    class,
                    replaces: Some(given),
                    at: c,
                    reviewer: reviewer_name(LEAD),
                },
            ));
        }
    }
    out.sort_by_key(|(at, index, kind, _)| (*at, *index, *kind));
    out.into_iter().map(|(_, _, _, l)| l).collect()
}
