//! Every metric of the service: names as constants (units in the names), bounded labels, one registry rendered as Prometheus text.
//!
//! Label values are bounded: `class` takes the model's classes, `reason` the
//! fixed dead-letter reasons, `kind` a fixed set. Record content never becomes
//! a label.

use prometheus::{Encoder, Histogram, HistogramOpts, IntCounter, IntCounterVec, IntGauge, Opts, Registry, TextEncoder};

pub const RECORDS_IN: &str = "sieveline_records_in_total";
pub const RECORDS_OUT: &str = "sieveline_records_out_total";
pub const RECORDS_REVIEWED: &str = "sieveline_records_reviewed_total";
pub const RECORDS_DEAD_LETTERED: &str = "sieveline_records_dead_lettered_total";
pub const DECISIONS: &str = "sieveline_decisions_total";
pub const SCORING_LATENCY: &str = "sieveline_scoring_latency_seconds";
pub const END_TO_END_LATENCY: &str = "sieveline_end_to_end_latency_seconds";
pub const IN_FLIGHT: &str = "sieveline_records_in_flight";
pub const IN_FLIGHT_LIMIT: &str = "sieveline_in_flight_limit_per_partition_records";
pub const PARTITIONS_ASSIGNED: &str = "sieveline_partitions_assigned";
pub const OUTPUT_RETRIES: &str = "sieveline_output_retries_total";
pub const OFFSET_COMMITS: &str = "sieveline_offset_commits_total";
pub const DRAIN_TIMEOUTS: &str = "sieveline_drain_timeouts_total";
pub const CONSUMER_ERRORS: &str = "sieveline_consumer_errors_total";
pub const MODEL_CLASSES: &str = "sieveline_model_classes";
pub const REBALANCES: &str = "sieveline_rebalances_total";

// Online learning (docs/learning.md).
pub const LABELS_READ: &str = "sieveline_labels_read_total";
pub const LABELS_LEARNED: &str = "sieveline_labels_learned_total";
pub const LABEL_CORRECTIONS: &str = "sieveline_label_corrections_total";
pub const LABELS_REJECTED: &str = "sieveline_labels_rejected_total";
pub const LABELS_RESOLVED: &str = "sieveline_labels_resolved_total";
pub const LABEL_LOG_ERRORS: &str = "sieveline_label_log_errors_total";
pub const LABEL_LOG_CAUGHT_UP: &str = "sieveline_label_log_caught_up";
pub const RECENT_RECORDS: &str = "sieveline_recent_records";
pub const RECENT_RECORDS_LIMIT: &str = "sieveline_recent_records_limit";
pub const MODEL_PUBLISHES: &str = "sieveline_model_publishes_total";
pub const MODEL_LABELS_APPLIED: &str = "sieveline_model_labels_applied";
pub const LABEL_PUBLISH_DELAY: &str = "sieveline_label_publish_delay_seconds";
pub const SNAPSHOTS: &str = "sieveline_snapshots_total";
pub const LAST_SNAPSHOT: &str = "sieveline_last_snapshot_timestamp_seconds";
pub const MODEL_LOADS: &str = "sieveline_model_loads_total";

/// Label of [`RECORDS_DEAD_LETTERED`].
pub const LABEL_REASON: &str = "reason";
/// Label of [`DECISIONS`].
pub const LABEL_CLASS: &str = "class";
/// Label of [`OFFSET_COMMITS`]: `ok` or `error`.
pub const LABEL_RESULT: &str = "result";
/// Label of [`REBALANCES`]: `assign` or `revoke`.
pub const LABEL_KIND: &str = "kind";

/// The service's metrics, registered in their own registry.
#[derive(Clone)]
pub struct Metrics {
    registry: Registry,
    pub records_in: IntCounter,
    pub records_out: IntCounter,
    pub records_reviewed: IntCounter,
    pub dead_lettered: IntCounterVec,
    pub decisions: IntCounterVec,
    pub scoring_latency: Histogram,
    pub end_to_end_latency: Histogram,
    pub in_flight: IntGauge,
    pub in_flight_limit: IntGauge,
    pub partitions_assigned: IntGauge,
    pub output_retries: IntCounter,
    pub offset_commits: IntCounterVec,
    pub drain_timeouts: IntCounter,
    pub consumer_errors: IntCounter,
    pub model_classes: IntGauge,
    pub labels_read: IntCounter,
    pub labels_learned: IntCounter,
    pub label_corrections: IntCounter,
    pub labels_rejected: IntCounterVec,
    pub labels_resolved: IntCounter,
    pub label_log_errors: IntCounter,
    pub label_log_caught_up: IntGauge,
    pub recent_records: IntGauge,
    pub recent_records_limit: IntGauge,
    pub model_publishes: IntCounter,
    pub model_labels_applied: IntGauge,
    pub label_publish_delay: Histogram,
    pub snapshots: IntCounterVec,
    pub last_snapshot: IntGauge,
    pub model_loads: IntCounterVec,
    pub rebalances: IntCounterVec,
}

impl Metrics {
    pub fn new() -> Metrics {
        let registry = Registry::new();
        let counter = |name: &str, help: &str| {
            let c = IntCounter::with_opts(Opts::new(name, help)).expect("valid counter");
            registry.register(Box::new(c.clone())).expect("unique metric");
            c
        };
        let counter_vec = |name: &str, help: &str, label: &str| {
            let c = IntCounterVec::new(Opts::new(name, help), &[label]).expect("valid counter");
            registry.register(Box::new(c.clone())).expect("unique metric");
            c
        };
        let gauge = |name: &str, help: &str| {
            let g = IntGauge::with_opts(Opts::new(name, help)).expect("valid gauge");
            registry.register(Box::new(g.clone())).expect("unique metric");
            g
        };
        let histogram = |name: &str, help: &str, buckets: Vec<f64>| {
            let h = Histogram::with_opts(HistogramOpts::new(name, help).buckets(buckets)).expect("valid histogram");
            registry.register(Box::new(h.clone())).expect("unique metric");
            h
        };
        Metrics {
            records_in: counter(RECORDS_IN, "Records read from the source."),
            records_out: counter(RECORDS_OUT, "Decisions acknowledged by the sink at their class destination."),
            records_reviewed: counter(RECORDS_REVIEWED, "Uncertain decisions acknowledged on the review destination."),
            dead_lettered: counter_vec(
                RECORDS_DEAD_LETTERED,
                "Records acknowledged on the dead-letter destination, by reason.",
                LABEL_REASON,
            ),
            decisions: counter_vec(DECISIONS, "Decisions (routed or reviewed) acknowledged, by class.", LABEL_CLASS),
            scoring_latency: histogram(
                SCORING_LATENCY,
                "Decode, analyze, score and route one record.",
                prometheus::exponential_buckets(1e-6, 2.0, 18).expect("buckets"),
            ),
            end_to_end_latency: histogram(
                END_TO_END_LATENCY,
                "From the input record's timestamp (Kafka CreateTime, or LogAppendTime if the topic uses it; read time for stdin/files) to the output's acknowledgement.",
                prometheus::exponential_buckets(0.0005, 2.0, 20).expect("buckets"),
            ),
            in_flight: gauge(IN_FLIGHT, "Records read but not yet acknowledged by the sink."),
            in_flight_limit: gauge(IN_FLIGHT_LIMIT, "The per-partition in-flight bound (delivery.max_in_flight_per_partition)."),
            partitions_assigned: gauge(PARTITIONS_ASSIGNED, "Source partitions currently assigned to this instance."),
            output_retries: counter(OUTPUT_RETRIES, "Outputs sent again after a failed delivery or a full producer queue."),
            offset_commits: counter_vec(OFFSET_COMMITS, "Explicit offset commits (revoke, shutdown), by result.", LABEL_RESULT),
            drain_timeouts: counter(DRAIN_TIMEOUTS, "Drains (revoke or shutdown) that hit their time limit with records in flight."),
            consumer_errors: counter(CONSUMER_ERRORS, "Errors reported by the Kafka consumer (the client retries by itself)."),
            model_classes: gauge(MODEL_CLASSES, "Classes of the model being served."),
            labels_read: counter(LABELS_READ, "Label events read from the learned-label log (every replica reads all of them)."),
            labels_learned: counter(LABELS_LEARNED, "Label events folded into the model, corrections included."),
            label_corrections: counter(LABEL_CORRECTIONS, "Label events that replaced an earlier label of the same record."),
            labels_rejected: counter_vec(
                LABELS_REJECTED,
                "Label events refused (learned-label log or id-only labels), by reason; each becomes a dead letter.",
                LABEL_REASON,
            ),
            labels_resolved: counter(LABELS_RESOLVED, "Id-only labels resolved into complete events and acknowledged on the learned-label topic."),
            label_log_errors: counter(LABEL_LOG_ERRORS, "Errors reading the label log (the reader retries)."),
            label_log_caught_up: gauge(LABEL_LOG_CAUGHT_UP, "1 once the learner has read every label-log partition to its end since start or reload."),
            recent_records: gauge(RECENT_RECORDS, "Records in the recent-record cache that resolves id-only labels."),
            recent_records_limit: gauge(RECENT_RECORDS_LIMIT, "Capacity of the recent-record cache (learning.recent_capacity)."),
            model_publishes: counter(MODEL_PUBLISHES, "Model views published to the scorers by the learner or a reload."),
            model_labels_applied: gauge(MODEL_LABELS_APPLIED, "Labels learned on top of the served base model file."),
            label_publish_delay: histogram(
                LABEL_PUBLISH_DELAY,
                "From a label event's log timestamp to the publish of the first view that includes it.",
                prometheus::exponential_buckets(0.001, 2.0, 16).expect("buckets"),
            ),
            snapshots: counter_vec(SNAPSHOTS, "Model snapshots written, by result.", LABEL_RESULT),
            last_snapshot: gauge(LAST_SNAPSHOT, "Unix time of the last snapshot written (0: none yet)."),
            model_loads: counter_vec(MODEL_LOADS, "Model files loaded by the learner (start and reload), by result (ok, refused).", LABEL_RESULT),
            rebalances: counter_vec(REBALANCES, "Consumer group rebalance events of this replica, by kind (assign, revoke).", LABEL_KIND),
            registry,
        }
    }

    /// Prometheus text exposition format.
    pub fn render(&self) -> String {
        let mut buf = Vec::new();
        TextEncoder::new().encode(&self.registry.gather(), &mut buf).expect("text encoding never fails");
        String::from_utf8(buf).expect("exposition text is UTF-8")
    }
}

impl Default for Metrics {
    fn default() -> Self {
        Metrics::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn renders_every_family_with_units_in_names() {
        let m = Metrics::new();
        m.records_in.inc();
        m.dead_lettered.with_label_values(&["bad json"]).inc();
        m.decisions.with_label_values(&["billing"]).inc_by(2);
        let text = m.render();
        assert!(text.contains("sieveline_records_in_total 1"), "{text}");
        assert!(text.contains(r#"sieveline_records_dead_lettered_total{reason="bad json"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_decisions_total{class="billing"} 2"#), "{text}");
        assert!(text.contains("sieveline_scoring_latency_seconds_bucket"), "{text}");
    }
}
