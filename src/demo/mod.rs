//! The demo scenario generator: a seeded, deterministic stream of support tickets and log lines, their ground truth, and simulated reviewers' label events, in three phases.
//!
//! Pure: [`generate`] builds everything in memory from a [`DemoConfig`]; the
//! only I/O is [`write::write_streams`]. The wire shapes are documented in
//! `docs/demo.md`.
//!
//! - [`vocabulary`]: every name and phrase of the invented scenario;
//! - [`script`]: the phases, their boundaries and parameters;
//! - [`compose`]: template filling and typos;
//! - [`tickets`], [`logs`]: one record each;
//! - [`reviewers`]: label events with delays, mistakes and corrections;
//! - [`write`]: the files and the manifest;
//! - [`report`]: the `demo` command's figures from decisions and ground truth.
//!
//! Randomness: one `SplitMix64` per stream and purpose, seeded from the demo
//! seed, so the ticket text does not change when label parameters do, and
//! the same seed gives byte-identical files.

pub mod compose;
pub mod logs;
pub mod report;
pub mod reviewers;
pub mod script;
pub mod tickets;
pub mod vocabulary;
pub mod write;

use serde::Serialize;

use crate::eval::folds::SplitMix64;
use reviewers::Label;
use script::Boundaries;

/// 2026-03-02T08:00:00Z, when every stream starts.
pub const START_UNIX: i64 = 1_772_438_400;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    Tickets,
    Logs,
}

impl Kind {
    pub fn name(self) -> &'static str {
        match self {
            Kind::Tickets => "tickets",
            Kind::Logs => "logs",
        }
    }

    fn salt(self) -> u64 {
        match self {
            Kind::Tickets => 0x7469_636b_6574_7321,
            Kind::Logs => 0x6c6f_675f_6c69_6e65,
        }
    }

    pub fn classes(self) -> Vec<&'static str> {
        match self {
            Kind::Tickets => vocabulary::ticket_classes(),
            Kind::Logs => vocabulary::log_classes(),
        }
    }

    fn neighbours(self, class: &str) -> &'static [&'static str] {
        match self {
            Kind::Tickets => vocabulary::TEAMS
                .iter()
                .find(|t| t.class == class)
                .map_or(&[], |t| t.neighbours),
            Kind::Logs => vocabulary::FAILURE_KINDS
                .iter()
                .find(|k| k.class == class)
                .map_or(&[], |k| k.neighbours),
        }
    }
}

#[derive(Debug, Clone)]
pub struct DemoConfig {
    pub seed: u64,
    /// Records per stream.
    pub records: usize,
    pub kinds: Vec<Kind>,
    pub phase2_at: f64,
    pub phase3_at: f64,
}

impl DemoConfig {
    pub fn new(seed: u64, records: usize, kinds: Vec<Kind>) -> DemoConfig {
        DemoConfig {
            seed,
            records,
            kinds,
            phase2_at: script::DEFAULT_PHASE2_AT,
            phase3_at: script::DEFAULT_PHASE3_AT,
        }
    }
}

/// A record's text fields: what a label event's `fields` carries.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(untagged)]
pub enum Fields {
    Ticket { subject: String, body: String },
    Log { service: String, text: String },
}

/// A record as written to `<kind>.jsonl`: `id`, `ts`, then its fields.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Record {
    pub id: String,
    pub ts: String,
    #[serde(flatten)]
    pub fields: Fields,
}

/// The ground truth of one record.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Truth {
    pub id: String,
    pub class: &'static str,
    pub phase: u8,
    /// Any of `safety`, `new_line`, `outage`, `new_service`, `ambiguous`.
    pub tags: Vec<&'static str>,
}

/// One generated stream.
#[derive(Debug, Clone)]
pub struct Stream {
    pub kind: Kind,
    pub bounds: Boundaries,
    pub records: Vec<Record>,
    pub truth: Vec<Truth>,
    pub labels: Vec<Label>,
}

#[derive(Debug, Clone)]
pub struct Generated {
    pub config: DemoConfig,
    pub streams: Vec<Stream>,
}

/// Build every requested stream.
pub fn generate(config: &DemoConfig) -> Generated {
    let streams = config.kinds.iter().map(|&k| stream(config, k)).collect();
    Generated {
        config: config.clone(),
        streams,
    }
}

fn stream(config: &DemoConfig, kind: Kind) -> Stream {
    let bounds = Boundaries::new(config.records, config.phase2_at, config.phase3_at);
    let mut text_rng = SplitMix64::new(config.seed ^ kind.salt());
    let mut clock_rng = SplitMix64::new(config.seed ^ kind.salt().rotate_left(17));
    let mut label_rng = SplitMix64::new(config.seed ^ kind.salt().rotate_left(33));
    let prefix = match kind {
        Kind::Tickets => "tk",
        Kind::Logs => "lg",
    };
    let mut unix = START_UNIX;
    let mut records = Vec::with_capacity(config.records);
    let mut truth = Vec::with_capacity(config.records);
    for i in 0..config.records {
        let number = bounds.phase_of(i);
        let p = script::phase(number);
        let gap = match kind {
            Kind::Tickets => p.ticket_gap_secs,
            Kind::Logs => p.log_gap_secs,
        };
        if i > 0 {
            unix += compose::between(&mut clock_rng, gap.0, gap.1) as i64;
        }
        let millis = compose::between(&mut clock_rng, 0, 999);
        let id = format!("{prefix}-{i:06}");
        let ts = format!("{}.{millis:03}Z", &crate::clock::rfc3339(unix)[..19]);
        let mut tags = Vec::new();
        let (class, fields) = match kind {
            Kind::Tickets => {
                let t = tickets::ticket(&mut text_rng, p, unix);
                for (on, tag) in [
                    (t.hazard, "safety"),
                    (t.new_line, "new_line"),
                    (t.outage, "outage"),
                    (t.ambiguous, "ambiguous"),
                ] {
                    if on {
                        tags.push(tag);
                    }
                }
                (
                    t.class,
                    Fields::Ticket {
                        subject: t.subject,
                        body: t.body,
                    },
                )
            }
            Kind::Logs => {
                let l = logs::log_line(&mut text_rng, p, unix, millis);
                for (on, tag) in [
                    (l.outage, "outage"),
                    (l.new_service, "new_service"),
                    (l.ambiguous, "ambiguous"),
                ] {
                    if on {
                        tags.push(tag);
                    }
                }
                (
                    l.class,
                    Fields::Log {
                        service: l.service.to_string(),
                        text: l.text,
                    },
                )
            }
        };
        truth.push(Truth {
            id: id.clone(),
            class,
            phase: number,
            tags,
        });
        records.push(Record { id, ts, fields });
    }
    let classes = kind.classes();
    let true_classes: Vec<&'static str> = truth.iter().map(|t| t.class).collect();
    let labels = reviewers::schedule(
        &mut label_rng,
        &true_classes,
        &classes,
        |c| kind.neighbours(c),
        &bounds,
    );
    Stream {
        kind,
        bounds,
        records,
        truth,
        labels,
    }
}
