//! Every metric of the service: names as constants (units in the names), bounded labels, one registry rendered as Prometheus text.
//!
//! Label values are bounded: `class` takes the model's classes, `reason` the
//! fixed dead-letter reasons, `kind` a fixed set, `by` model/rule/none, `rule`
//! the ids of the loaded rules file (series of rules no longer loaded are
//! removed at reload), `target` model/rules and `result` ok/refused. Record
//! content never becomes a label.

use std::sync::Mutex;

use prometheus::{
    Encoder, Gauge, GaugeVec, Histogram, HistogramOpts, IntCounter, IntCounterVec, IntGauge, Opts, Registry, TextEncoder,
};

use crate::decide::DecidedBy;

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
pub const DECIDED_BY: &str = "sieveline_decided_by_total";
pub const RULE_DECISIONS: &str = "sieveline_rule_decisions_total";
pub const RULES_LOADED: &str = "sieveline_rules_loaded";
pub const RELOADS: &str = "sieveline_reloads_total";
pub const LAST_RELOAD: &str = "sieveline_last_reload_timestamp_seconds";

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
// Drift and health (docs/drift.md). Ratios are 0..1; the index and divergence are unitless / bits.
pub const DRIFT_WINDOW_RECORDS: &str = "sieveline_drift_window_records";
pub const DRIFT_CLASS_MIX_PSI: &str = "sieveline_drift_class_mix_psi";
pub const DRIFT_CLASS_MIX_JS: &str = "sieveline_drift_class_mix_js_divergence_bits";
pub const DRIFT_CLASS_SHARE: &str = "sieveline_drift_class_share_ratio";
pub const DRIFT_UNKNOWN_TOKENS: &str = "sieveline_drift_unknown_token_ratio";
pub const DRIFT_MOSTLY_UNKNOWN_RECORDS: &str = "sieveline_drift_mostly_unknown_record_ratio";
pub const DRIFT_CONFIDENCE_MEAN: &str = "sieveline_drift_confidence_mean_ratio";
pub const DRIFT_REVIEW_RATIO: &str = "sieveline_drift_review_ratio";
pub const DECISION_CONFIDENCE: &str = "sieveline_decision_confidence_ratio";
pub const FEEDBACK_LABELS: &str = "sieveline_feedback_labels_total";
pub const FEEDBACK_ACCURACY: &str = "sieveline_feedback_accuracy_ratio";
pub const FEEDBACK_CLASS_ACCURACY: &str = "sieveline_feedback_class_accuracy_ratio";
pub const FEEDBACK_WINDOW_LABELS: &str = "sieveline_feedback_window_labels";
pub const FEEDBACK_LABEL_DELAY: &str = "sieveline_feedback_label_delay_seconds";
pub const FEEDBACK_CHANGE_DETECTED: &str = "sieveline_feedback_change_detected";
pub const FEEDBACK_CHANGES: &str = "sieveline_feedback_changes_detected_total";
pub const FEEDBACK_PAGE_HINKLEY: &str = "sieveline_feedback_page_hinkley_statistic";
pub const FEEDBACK_SINCE_LAST_LABEL: &str = "sieveline_feedback_seconds_since_last_label";
pub const MODEL_SNAPSHOT_AGE: &str = "sieveline_model_snapshot_age_seconds";
pub const MODEL_RELOAD_AGE: &str = "sieveline_model_reload_age_seconds";
pub const CONSUMER_LAG: &str = "sieveline_consumer_lag_records";

/// Label of [`RECORDS_DEAD_LETTERED`].
pub const LABEL_REASON: &str = "reason";
/// Label of [`DECISIONS`].
pub const LABEL_CLASS: &str = "class";
/// Label of [`OFFSET_COMMITS`]: `ok` or `error`; of [`RELOADS`]: `ok` or `refused`.
pub const LABEL_RESULT: &str = "result";
/// Label of [`REBALANCES`]: `assign` or `revoke`.
pub const LABEL_KIND: &str = "kind";
/// Label of [`DRIFT_CLASS_SHARE`]: `window` or `reference`.
pub const LABEL_MIX: &str = "mix";
/// Label of [`DECIDED_BY`]: `model`, `rule` or `none`.
pub const LABEL_BY: &str = "by";
/// Label of [`RULE_DECISIONS`]: a rule id of the loaded rules file.
pub const LABEL_RULE: &str = "rule";
/// Label of [`RELOADS`] and [`LAST_RELOAD`]: `model` or `rules`.
pub const LABEL_TARGET: &str = "target";

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
    pub decided_by_model: IntCounter,
    pub decided_by_rule: IntCounter,
    pub decided_by_none: IntCounter,
    pub rule_decisions: IntCounterVec,
    pub rules_loaded: IntGauge,
    pub reloads: IntCounterVec,
    pub last_reload: GaugeVec,
    /// Rule ids that have a `rule_decisions` series (the loaded set's).
    rule_series: std::sync::Arc<Mutex<Vec<String>>>,
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
    pub drift: DriftMetrics,
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
        let by = IntCounterVec::new(
            Opts::new(DECIDED_BY, "Decisions made (routed or sent to review), by who decided: model, rule or none."),
            &[LABEL_BY],
        )
        .expect("valid counter");
        registry.register(Box::new(by.clone())).expect("unique metric");
        let reloads = IntCounterVec::new(
            Opts::new(RELOADS, "Reloads of the model or the rules, by result (refused: the old one kept serving)."),
            &[LABEL_TARGET, LABEL_RESULT],
        )
        .expect("valid counter");
        registry.register(Box::new(reloads.clone())).expect("unique metric");
        for target in ["model", "rules"] {
            for result in ["ok", "refused"] {
                reloads.with_label_values(&[target, result]);
            }
        }
        let last_reload =
            GaugeVec::new(Opts::new(LAST_RELOAD, "Unix time of the last successful reload, by target."), &[LABEL_TARGET])
                .expect("valid gauge");
        registry.register(Box::new(last_reload.clone())).expect("unique metric");
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
            decided_by_model: by.with_label_values(&["model"]),
            decided_by_rule: by.with_label_values(&["rule"]),
            decided_by_none: by.with_label_values(&["none"]),
            rule_decisions: counter_vec(
                RULE_DECISIONS,
                "Decisions made by each rule of the loaded rules file (counted when decided).",
                LABEL_RULE,
            ),
            rules_loaded: gauge(RULES_LOADED, "Rules in the rules file being served (0 without one)."),
            reloads,
            last_reload,
            rule_series: Default::default(),
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
            drift: DriftMetrics::register(&registry),
            registry,
        }
    }

    /// Count one decision by who made it.
    pub fn count_decided_by(&self, by: &DecidedBy) {
        match by {
            DecidedBy::Model => self.decided_by_model.inc(),
            DecidedBy::Rule(id) => {
                self.decided_by_rule.inc();
                self.rule_decisions.with_label_values(&[id.as_str()]).inc();
            }
            DecidedBy::Nobody => self.decided_by_none.inc(),
        }
    }

    /// A rules set was published: its rule count, and `rule_decisions` series
    /// for exactly its ids (new ones at 0, those of rules no longer loaded removed).
    pub fn rules_published<'a>(&self, ids: impl IntoIterator<Item = &'a str>) {
        let ids: Vec<String> = ids.into_iter().map(str::to_string).collect();
        let keep: std::collections::HashSet<&str> = ids.iter().map(String::as_str).collect();
        let mut series = self.rule_series.lock().unwrap_or_else(|e| e.into_inner());
        for old in series.iter().filter(|o| !keep.contains(o.as_str())) {
            let _ = self.rule_decisions.remove_label_values(&[old.as_str()]);
        }
        for id in &ids {
            self.rule_decisions.with_label_values(&[id.as_str()]);
        }
        self.rules_loaded.set(ids.len() as i64);
        *series = ids;
    }

    /// Count a reload of `target` (`model` or `rules`); `ok` also sets its timestamp.
    pub fn reloaded(&self, target: &str, ok: bool) {
        self.reloads.with_label_values(&[target, if ok { "ok" } else { "refused" }]).inc();
        if ok {
            let now = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0.0, |d| d.as_secs_f64());
            self.last_reload.with_label_values(&[target]).set(now);
        }
    }

    /// Prometheus text exposition format.
    pub fn render(&self) -> String {
        let mut buf = Vec::new();
        TextEncoder::new().encode(&self.registry.gather(), &mut buf).expect("text encoding never fails");
        String::from_utf8(buf).expect("exposition text is UTF-8")
    }
}

/// Drift and health metrics (docs/drift.md): gauges the record loop sets when it summarises its
/// window, feedback metrics the learner's calls update, freshness gauges set at each scrape.
#[derive(Clone)]
pub struct DriftMetrics {
    pub window_records: IntGauge,
    pub class_mix_psi: Gauge,
    pub class_mix_js_bits: Gauge,
    pub class_share: GaugeVec,
    pub unknown_tokens: Gauge,
    pub mostly_unknown_records: Gauge,
    pub confidence_mean: Gauge,
    pub review_ratio: Gauge,
    pub decision_confidence: Histogram,
    pub feedback_labels: IntCounterVec,
    pub feedback_accuracy: Gauge,
    pub feedback_class_accuracy: GaugeVec,
    pub feedback_window_labels: IntGauge,
    pub feedback_label_delay: Histogram,
    pub feedback_change_detected: IntGauge,
    pub feedback_changes: IntCounter,
    pub feedback_page_hinkley: Gauge,
    pub feedback_since_last_label: Gauge,
    pub snapshot_age: Gauge,
    pub reload_age: Gauge,
    pub consumer_lag: IntGauge,
}

impl DriftMetrics {
    fn register(registry: &Registry) -> DriftMetrics {
        fn reg<M: prometheus::core::Collector + Clone + 'static>(r: &Registry, m: M) -> M {
            r.register(Box::new(m.clone())).expect("unique metric");
            m
        }
        let gauge = |name: &str, help: &str| reg(registry, Gauge::with_opts(Opts::new(name, help)).expect("valid gauge"));
        let igauge = |name: &str, help: &str| reg(registry, IntGauge::with_opts(Opts::new(name, help)).expect("valid gauge"));
        let counter = |name: &str, help: &str| reg(registry, IntCounter::with_opts(Opts::new(name, help)).expect("valid counter"));
        let nan = |g: Gauge| {
            g.set(f64::NAN);
            g
        };
        let m = DriftMetrics {
            window_records: igauge(DRIFT_WINDOW_RECORDS, "Decided records in the drift window (drift.window_records at most)."),
            class_mix_psi: nan(gauge(
                DRIFT_CLASS_MIX_PSI,
                "Population stability index of the window's predicted-class mix against the reference (NaN until drift.min_records).",
            )),
            class_mix_js_bits: nan(gauge(
                DRIFT_CLASS_MIX_JS,
                "Jensen-Shannon divergence (bits, 0..1) of the window's predicted-class mix against the reference.",
            )),
            class_share: reg(
                registry,
                GaugeVec::new(
                    Opts::new(DRIFT_CLASS_SHARE, "Share of each class in the window's decisions and in the reference."),
                    &[LABEL_CLASS, LABEL_MIX],
                )
                .expect("valid gauge"),
            ),
            unknown_tokens: nan(gauge(DRIFT_UNKNOWN_TOKENS, "Share of the window's tokens the model has never counted.")),
            mostly_unknown_records: nan(gauge(
                DRIFT_MOSTLY_UNKNOWN_RECORDS,
                "Share of the window's records with more than half their tokens unknown to the model.",
            )),
            confidence_mean: nan(gauge(DRIFT_CONFIDENCE_MEAN, "Mean confidence (posterior of the decided class) over the window.")),
            review_ratio: nan(gauge(DRIFT_REVIEW_RATIO, "Share of the window's decisions sent to review.")),
            decision_confidence: reg(
                registry,
                Histogram::with_opts(
                    HistogramOpts::new(DECISION_CONFIDENCE, "Confidence of each decision (posterior of the decided class).")
                        .buckets((1..=10).map(|i| i as f64 / 10.0).collect()),
                )
                .expect("valid histogram"),
            ),
            feedback_labels: reg(
                registry,
                IntCounterVec::new(
                    Opts::new(FEEDBACK_LABELS, "Labels compared with the decision made before they arrived, by result (correct, wrong)."),
                    &[LABEL_RESULT],
                )
                .expect("valid counter"),
            ),
            feedback_accuracy: nan(gauge(
                FEEDBACK_ACCURACY,
                "Prequential accuracy over the last drift.feedback_window_labels labels (decision made before the label).",
            )),
            feedback_class_accuracy: reg(
                registry,
                GaugeVec::new(
                    Opts::new(
                        FEEDBACK_CLASS_ACCURACY,
                        "Prequential accuracy on the window's labels of each true class with at least drift.feedback_min_class_labels labels.",
                    ),
                    &[LABEL_CLASS],
                )
                .expect("valid gauge"),
            ),
            feedback_window_labels: igauge(FEEDBACK_WINDOW_LABELS, "Labels in the feedback accuracy window."),
            feedback_label_delay: reg(
                registry,
                Histogram::with_opts(
                    HistogramOpts::new(FEEDBACK_LABEL_DELAY, "From a record's time to the time of its label.")
                        .buckets(prometheus::exponential_buckets(1.0, 4.0, 10).expect("buckets")),
                )
                .expect("valid histogram"),
            ),
            feedback_change_detected: igauge(
                FEEDBACK_CHANGE_DETECTED,
                "1 while a Page-Hinkley change in the feedback error rate was detected within the last drift.change_hold_labels labels.",
            ),
            feedback_changes: counter(FEEDBACK_CHANGES, "Page-Hinkley detections of a rise in the feedback error rate."),
            feedback_page_hinkley: gauge(FEEDBACK_PAGE_HINKLEY, "The Page-Hinkley statistic on the feedback error stream (alarm above drift.page_hinkley_lambda)."),
            feedback_since_last_label: gauge(FEEDBACK_SINCE_LAST_LABEL, "Seconds since the last label arrived (since start if none has)."),
            snapshot_age: gauge(
                MODEL_SNAPSHOT_AGE,
                "Seconds since the newest of: the served snapshot's creation time, the last snapshot this process wrote.",
            ),
            reload_age: gauge(MODEL_RELOAD_AGE, "Seconds since the served model was loaded from a file (start counts as a load)."),
            consumer_lag: igauge(CONSUMER_LAG, "Records behind the end of the assigned source partitions, summed (librdkafka statistics)."),
        };
        for r in ["correct", "wrong"] {
            m.feedback_labels.with_label_values(&[r]);
        }
        m
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

    #[test]
    fn decided_by_and_rule_series_follow_the_loaded_rules() {
        let m = Metrics::new();
        m.rules_published(["refund-words", "hazard-guard"]);
        m.count_decided_by(&DecidedBy::Model);
        m.count_decided_by(&DecidedBy::Rule("refund-words".into()));
        m.count_decided_by(&DecidedBy::Nobody);
        let text = m.render();
        assert!(text.contains(r#"sieveline_decided_by_total{by="model"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_decided_by_total{by="rule"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_decided_by_total{by="none"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_rule_decisions_total{rule="refund-words"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_rule_decisions_total{rule="hazard-guard"} 0"#), "{text}");
        assert!(text.contains("sieveline_rules_loaded 2"), "{text}");
        // A reload to a set without the hazard guard drops its series.
        m.rules_published(["refund-words", "late-parcel"]);
        let text = m.render();
        assert!(!text.contains("hazard-guard"), "{text}");
        assert!(text.contains(r#"sieveline_rule_decisions_total{rule="late-parcel"} 0"#), "{text}");
        assert!(text.contains(r#"sieveline_rule_decisions_total{rule="refund-words"} 1"#), "{text}");
    }

    #[test]
    fn reloads_count_by_target_and_result_and_stamp_successes() {
        let m = Metrics::new();
        let text = m.render();
        assert!(text.contains(r#"sieveline_reloads_total{result="refused",target="rules"} 0"#), "{text}");
        m.reloaded("rules", false);
        m.reloaded("model", true);
        let text = m.render();
        assert!(text.contains(r#"sieveline_reloads_total{result="refused",target="rules"} 1"#), "{text}");
        assert!(text.contains(r#"sieveline_reloads_total{result="ok",target="model"} 1"#), "{text}");
        assert!(!text.contains(r#"sieveline_last_reload_timestamp_seconds{target="rules"}"#), "{text}");
        let stamp = text
            .lines()
            .find(|l| l.starts_with(r#"sieveline_last_reload_timestamp_seconds{target="model"}"#))
            .and_then(|l| l.rsplit(' ').next()?.parse::<f64>().ok())
            .expect("model reload timestamp");
        assert!(stamp > 1.7e9, "{stamp}");
    }
}
