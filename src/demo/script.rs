//! The demo script: three phases by record index (steady state, new product line, outage) and every number that shapes each phase.
//!
//! Phase boundaries are fractions of the stream length, rounded to record
//! indices, and written to the manifest. Class shares are relative weights
//! (normalised when sampling); every class id here must be a class of the
//! vocabulary, which a test checks.

use serde::Serialize;

/// One phase of the script.
#[derive(Debug, Clone, Serialize)]
pub struct Phase {
    pub phase: u8,
    pub name: &'static str,
    pub summary: &'static str,
    /// Relative weight of each ticket class.
    pub ticket_shares: &'static [(&'static str, f64)],
    /// Relative weight of each log class.
    pub log_shares: &'static [(&'static str, f64)],
    /// Chance that a ticket of a team with new-line phrases is about the new line (defects excepted).
    pub new_line_share: f64,
    /// Chance that a defect ticket is about the new line.
    pub new_line_defect_share: f64,
    /// Chance that a defect ticket reports a safety hazard.
    pub hazard_share: f64,
    /// Chance that a ticket of a team with outage phrases is about the outage.
    pub outage_ticket_share: f64,
    /// Chance that a log line comes from the new line's device service.
    pub new_service_share: f64,
    /// Chance that a timeout line is an outage line from an outage service.
    pub outage_log_share: f64,
    /// Chance that a log line is one of the genuinely ambiguous messages.
    pub ambiguous_log_share: f64,
    /// Share of records a reviewer labels.
    pub label_share: f64,
    /// Seconds between consecutive tickets / log lines, inclusive range.
    pub ticket_gap_secs: (u64, u64),
    pub log_gap_secs: (u64, u64),
}

const STEADY_TICKETS: &[(&str, f64)] = &[
    ("returns", 16.0),
    ("shipping", 18.0),
    ("billing", 12.0),
    ("account_access", 10.0),
    ("product_defect", 10.0),
    ("warranty", 10.0),
    ("order_changes", 12.0),
    ("product_questions", 12.0),
];
const LAUNCH_TICKETS: &[(&str, f64)] = &[
    ("returns", 13.0),
    ("shipping", 14.0),
    ("billing", 9.0),
    ("account_access", 8.0),
    ("product_defect", 24.0),
    ("warranty", 10.0),
    ("order_changes", 8.0),
    ("product_questions", 14.0),
];
const OUTAGE_TICKETS: &[(&str, f64)] = &[
    ("returns", 11.0),
    ("shipping", 12.0),
    ("billing", 20.0),
    ("account_access", 9.0),
    ("product_defect", 20.0),
    ("warranty", 8.0),
    ("order_changes", 12.0),
    ("product_questions", 8.0),
];
const STEADY_LOGS: &[(&str, f64)] = &[
    ("timeout", 18.0),
    ("connection_refused", 16.0),
    ("auth_failure", 12.0),
    ("disk_full", 10.0),
    ("out_of_memory", 10.0),
    ("rate_limited", 16.0),
    ("malformed_payload", 18.0),
];
/// The outage floods the timeout family: 60% of lines, the rest in steady proportions.
const OUTAGE_LOGS: &[(&str, f64)] = &[
    ("timeout", 60.0),
    ("connection_refused", 8.2),
    ("auth_failure", 6.1),
    ("disk_full", 4.9),
    ("out_of_memory", 4.9),
    ("rate_limited", 8.2),
    ("malformed_payload", 7.7),
];

pub const PHASES: [Phase; 3] = [
    Phase {
        phase: 1,
        name: "steady",
        summary: "steady state: the established range, usual team mix, usual log mix",
        ticket_shares: STEADY_TICKETS,
        log_shares: STEADY_LOGS,
        new_line_share: 0.0,
        new_line_defect_share: 0.0,
        hazard_share: 0.15,
        outage_ticket_share: 0.0,
        new_service_share: 0.0,
        outage_log_share: 0.0,
        ambiguous_log_share: 0.08,
        label_share: 0.35,
        ticket_gap_secs: (20, 160),
        log_gap_secs: (1, 8),
    },
    Phase {
        phase: 2,
        name: "new_line",
        summary: "the heated product line launches: new vocabulary, defect tickets rise to about a quarter, a new device service logs",
        ticket_shares: LAUNCH_TICKETS,
        log_shares: STEADY_LOGS,
        new_line_share: 0.3,
        new_line_defect_share: 0.7,
        hazard_share: 0.2,
        outage_ticket_share: 0.0,
        new_service_share: 0.25,
        outage_log_share: 0.0,
        ambiguous_log_share: 0.08,
        label_share: 0.45,
        ticket_gap_secs: (15, 120),
        log_gap_secs: (1, 8),
    },
    Phase {
        phase: 3,
        name: "outage",
        summary: "the payment upstream fails: timeout lines flood the logs, billing tickets about failed checkouts rise",
        ticket_shares: OUTAGE_TICKETS,
        log_shares: OUTAGE_LOGS,
        new_line_share: 0.25,
        new_line_defect_share: 0.6,
        hazard_share: 0.2,
        outage_ticket_share: 0.6,
        new_service_share: 0.15,
        outage_log_share: 0.85,
        ambiguous_log_share: 0.08,
        label_share: 0.35,
        ticket_gap_secs: (10, 90),
        log_gap_secs: (0, 2),
    },
];

/// Where phases 2 and 3 start, by default, as fractions of the stream.
pub const DEFAULT_PHASE2_AT: f64 = 0.4;
pub const DEFAULT_PHASE3_AT: f64 = 0.7;

/// Phase boundaries of one stream, as record indices (0-based, half-open).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Boundaries {
    pub records: usize,
    pub phase2_start: usize,
    pub phase3_start: usize,
}

impl Boundaries {
    /// Fractions must satisfy 0 < phase2_at < phase3_at < 1.
    pub fn new(records: usize, phase2_at: f64, phase3_at: f64) -> Boundaries {
        assert!(
            0.0 < phase2_at && phase2_at < phase3_at && phase3_at < 1.0,
            "phase fractions out of order"
        );
        let at = |f: f64| ((records as f64) * f).round() as usize;
        Boundaries {
            records,
            phase2_start: at(phase2_at),
            phase3_start: at(phase3_at),
        }
    }

    /// The phase (1, 2 or 3) of record `index`.
    pub fn phase_of(&self, index: usize) -> u8 {
        if index < self.phase2_start {
            1
        } else if index < self.phase3_start {
            2
        } else {
            3
        }
    }

    /// Half-open index range of a phase.
    pub fn range(&self, phase: u8) -> std::ops::Range<usize> {
        match phase {
            1 => 0..self.phase2_start,
            2 => self.phase2_start..self.phase3_start,
            _ => self.phase3_start..self.records,
        }
    }
}

pub fn phase(number: u8) -> &'static Phase {
    &PHASES[(number as usize).clamp(1, 3) - 1]
}

/// Normalised share of `class` in a share table (0 if absent).
pub fn share_of(table: &[(&str, f64)], class: &str) -> f64 {
    let total: f64 = table.iter().map(|(_, w)| w).sum();
    table
        .iter()
        .find(|(c, _)| *c == class)
        .map_or(0.0, |(_, w)| w / total)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::demo::vocabulary::{log_classes, ticket_classes};

    #[test]
    fn share_tables_name_every_class_exactly_once() {
        let tickets = ticket_classes();
        let logs = log_classes();
        for p in &PHASES {
            let mut t: Vec<&str> = p.ticket_shares.iter().map(|(c, _)| *c).collect();
            let mut l: Vec<&str> = p.log_shares.iter().map(|(c, _)| *c).collect();
            t.sort();
            l.sort();
            let (mut et, mut el) = (tickets.clone(), logs.clone());
            et.sort();
            el.sort();
            assert_eq!(t, et, "phase {} ticket shares", p.phase);
            assert_eq!(l, el, "phase {} log shares", p.phase);
            assert!(p
                .ticket_shares
                .iter()
                .chain(p.log_shares)
                .all(|(_, w)| *w > 0.0));
        }
    }

    #[test]
    fn boundaries_split_by_index() {
        let b = Boundaries::new(1000, 0.4, 0.7);
        assert_eq!((b.phase2_start, b.phase3_start), (400, 700));
        assert_eq!(b.phase_of(0), 1);
        assert_eq!(b.phase_of(399), 1);
        assert_eq!(b.phase_of(400), 2);
        assert_eq!(b.phase_of(699), 2);
        assert_eq!(b.phase_of(700), 3);
        assert_eq!(b.range(3), 700..1000);
    }

    #[test]
    fn the_outage_floods_timeouts_and_the_launch_raises_defects() {
        assert!(share_of(PHASES[2].log_shares, "timeout") > 0.55);
        assert!(share_of(PHASES[0].log_shares, "timeout") < 0.2);
        assert!(
            share_of(PHASES[1].ticket_shares, "product_defect")
                > 2.0 * share_of(PHASES[0].ticket_shares, "product_defect")
        );
    }
}
