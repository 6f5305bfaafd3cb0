//! The demo's end-of-run figures, computed from what the service wrote and the generator's ground truth: accuracy and review rate per phase, rules-only accuracy, and how many records after each phase change the drift indicator was raised.

use std::collections::HashMap;

use serde::Serialize;

use super::script::Boundaries;
use super::Truth;

/// One decision as the demo reads it back from the service's output.
#[derive(Debug, Clone, PartialEq)]
pub struct Seen {
    pub id: String,
    pub class: String,
    pub reviewed: bool,
    /// `model`, `rule:<id>` or `none`.
    pub decided_by: String,
}

/// Figures for one phase of one stream.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct PhaseFigures {
    pub phase: u8,
    pub records: usize,
    /// Records whose decided class is the true class (reviewed ones included).
    pub accuracy: f64,
    /// The same over the last half of the phase, after the labels of its start arrived.
    pub accuracy_second_half: f64,
    pub review_rate: f64,
    /// Share decided by the model (not a rule).
    pub model_share: f64,
    /// Hand-written rules alone on the same records (a record no rule assigns counts as wrong).
    pub rules_only_accuracy: f64,
    pub rules_only_coverage: f64,
}

/// Accuracy and review figures per phase. `rules_only(i)` is the class the
/// rules alone give record `i`, if any.
pub fn phase_figures(
    truth: &[Truth],
    bounds: &Boundaries,
    seen: &[Seen],
    rules_only: impl Fn(usize) -> Option<String>,
) -> Vec<PhaseFigures> {
    let by_id: HashMap<&str, &Seen> = seen.iter().map(|s| (s.id.as_str(), s)).collect();
    (1..=3u8)
        .map(|phase| {
            let range = bounds.range(phase);
            let n = range.len().max(1) as f64;
            let half = range.start + range.len() / 2;
            let (mut right, mut right2, mut n2, mut reviewed, mut by_model, mut rules_right, mut rules_cover) = (0, 0, 0, 0, 0, 0, 0);
            for i in range.clone() {
                let t = &truth[i];
                if let Some(s) = by_id.get(t.id.as_str()) {
                    let ok = s.class == t.class;
                    right += usize::from(ok);
                    if i >= half {
                        n2 += 1;
                        right2 += usize::from(ok);
                    }
                    reviewed += usize::from(s.reviewed);
                    by_model += usize::from(s.decided_by == "model");
                }
                if let Some(c) = rules_only(i) {
                    rules_cover += 1;
                    rules_right += usize::from(c == t.class);
                }
            }
            PhaseFigures {
                phase,
                records: range.len(),
                accuracy: right as f64 / n,
                accuracy_second_half: right2 as f64 / (n2.max(1) as f64),
                review_rate: reviewed as f64 / n,
                model_share: by_model as f64 / n,
                rules_only_accuracy: rules_right as f64 / n,
                rules_only_coverage: rules_cover as f64 / n,
            }
        })
        .collect()
}

/// One reading of the drift indicators, taken as record `index` was fed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DriftSample {
    pub index: usize,
    /// Population stability index of the predicted-class mix against the reference.
    pub psi: f64,
    /// Share of records with more than half their terms unknown to the model.
    pub oov_records: f64,
    /// True when any drift alert condition holds (PSI, OOV surge, change detected).
    pub flagged: bool,
}

/// Records from each phase change (phases 2 and 3) to the first flagged
/// sample at or after it; `None` if never flagged in that phase.
pub fn flag_delays(samples: &[DriftSample], bounds: &Boundaries) -> Vec<(u8, Option<usize>)> {
    [(2u8, bounds.phase2_start, bounds.phase3_start), (3, bounds.phase3_start, bounds.records)]
        .into_iter()
        .map(|(phase, start, end)| {
            let first = samples.iter().find(|s| s.index >= start && s.index < end && s.flagged);
            (phase, first.map(|s| s.index - start))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn truth(classes: &[&'static str]) -> Vec<Truth> {
        classes.iter().enumerate().map(|(i, c)| Truth { id: format!("r{i}"), class: c, phase: 1, tags: vec![] }).collect()
    }

    #[test]
    fn figures_per_phase_count_right_reviewed_and_rules_only() {
        let t = truth(&["a", "a", "b", "b", "a", "b", "a", "b", "a", "b"]);
        let bounds = Boundaries::new(10, 0.4, 0.7);
        let seen: Vec<Seen> = t
            .iter()
            .enumerate()
            .map(|(i, x)| Seen {
                id: x.id.clone(),
                class: if i % 4 == 0 { "z".into() } else { x.class.to_string() },
                reviewed: i == 1,
                decided_by: if i < 2 { "rule:r".into() } else { "model".into() },
            })
            .collect();
        let f = phase_figures(&t, &bounds, &seen, |i| (i < 4).then(|| "a".to_string()));
        assert_eq!(f[0].records, 4);
        assert_eq!(f[0].accuracy, 0.75, "record 0 is decided z, 1-3 right");
        assert_eq!(f[0].accuracy_second_half, 1.0);
        assert_eq!(f[0].review_rate, 0.25);
        assert_eq!(f[0].model_share, 0.5);
        assert_eq!(f[0].rules_only_coverage, 1.0);
        assert_eq!(f[0].rules_only_accuracy, 0.5);
        assert_eq!(f[1].rules_only_coverage, 0.0);
    }

    #[test]
    fn flag_delay_is_counted_from_each_phase_start() {
        let bounds = Boundaries::new(100, 0.4, 0.7);
        let s = |index, flagged| DriftSample { index, psi: 0.0, oov_records: 0.0, flagged };
        let samples = vec![s(10, true), s(40, false), s(55, true), s(70, false), s(80, false)];
        assert_eq!(flag_delays(&samples, &bounds), vec![(2, Some(15)), (3, None)]);
    }
}
