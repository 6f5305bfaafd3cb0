//! Settings: the embedded defaults, an optional TOML file and `SIEVELINE__` environment overrides, validated once into one `Settings` value.
//!
//! Layering, lowest first: `config/default.toml` (compiled in), the file given
//! with `--config`, then environment variables named
//! `SIEVELINE__SECTION__KEY` (double underscores separate levels). Unknown
//! keys are errors. Every value is checked here, once; the rest of the program
//! trusts a `Settings` it is handed and never reads the environment itself.

use std::collections::BTreeMap;
use std::path::Path;

use config::{Config, Environment, File, FileFormat};
use serde::{Deserialize, Serialize};

use crate::error::SettingsError;

/// The compiled-in defaults; the same text as `config/default.toml`.
pub const DEFAULT_TOML: &str = include_str!("../config/default.toml");

/// Environment variable prefix for overrides, e.g. `SIEVELINE__MODEL__ALPHA=0.3`.
pub const ENV_PREFIX: &str = "SIEVELINE";
/// Separator between the prefix and the key, and between nested keys.
pub const ENV_SEPARATOR: &str = "__";

/// Field weights and label weights must be multiples of this, so sums of
/// weighted counts are exact in f64 whatever the order of learning.
pub const WEIGHT_QUANTUM: f64 = 1.0 / 16.0;
/// The largest accepted weight.
pub const MAX_WEIGHT: f64 = 64.0;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Settings {
    pub analyzer: AnalyzerSettings,
    pub input: InputSettings,
    pub model: ModelSettings,
    pub review: ReviewSettings,
    pub train: TrainSettings,
    pub rules: RulesSettings,
    pub service: ServiceSettings,
    pub source: SourceSettings,
    pub sink: SinkSettings,
    pub kafka: KafkaSettings,
    pub routing: RoutingSettings,
    pub dead_letter: DeadLetterSettings,
    pub delivery: DeliverySettings,
    pub admin: AdminSettings,
    pub reload: ReloadSettings,
    pub learning: LearningSettings,
    pub snapshot: SnapshotSettings,
    pub drift: DriftSettings,
    pub status_page: StatusPageSettings,
}

/// Everything that changes which terms a record yields. Its fingerprint goes
/// into every model, and a model built with other analyzer settings is refused.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AnalyzerSettings {
    pub lowercase: bool,
    pub min_token_len: usize,
    pub max_token_len: usize,
    pub bigrams: bool,
    pub stop_words: bool,
    pub collapse: CollapseSettings,
    #[serde(default)]
    pub patterns: Vec<PatternSetting>,
}

/// One switch per built-in collapsing family.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CollapseSettings {
    pub numbers: bool,
    pub hex_ids: bool,
    pub uuids: bool,
    pub ip_addresses: bool,
    pub emails: bool,
    pub urls: bool,
    pub paths: bool,
    pub timestamps: bool,
}

impl CollapseSettings {
    pub fn all(on: bool) -> Self {
        CollapseSettings {
            numbers: on,
            hex_ids: on,
            uuids: on,
            ip_addresses: on,
            emails: on,
            urls: on,
            paths: on,
            timestamps: on,
        }
    }
}

/// A user-defined collapsing pattern: every match becomes the token `<name>`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PatternSetting {
    pub name: String,
    pub regex: String,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputSettings {
    pub id_field: String,
    pub label_field: String,
    pub max_record_bytes: usize,
    pub fields: Vec<FieldSetting>,
}

/// A text field of a record and the weight of each of its terms.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FieldSetting {
    pub name: String,
    pub weight: f64,
}

/// A settings enum written as one of a fixed set of strings; an unknown
/// string is refused with the list of allowed ones.
macro_rules! choice_enum {
    ($(#[$doc:meta])* $name:ident { $($variant:ident => $text:literal),+ $(,)? }) => {
        $(#[$doc])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
        pub enum $name { $($variant),+ }

        impl $name {
            pub const ALLOWED: &'static [&'static str] = &[$($text),+];
            pub fn as_str(&self) -> &'static str {
                match self { $($name::$variant => $text),+ }
            }
        }

        impl std::str::FromStr for $name {
            type Err = String;
            fn from_str(s: &str) -> Result<Self, String> {
                match s {
                    $($text => Ok($name::$variant),)+
                    other => Err(format!("{other:?} is not allowed: expected one of {}", Self::ALLOWED.join(", "))),
                }
            }
        }

        impl Serialize for $name {
            fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
                s.serialize_str(self.as_str())
            }
        }

        impl<'de> Deserialize<'de> for $name {
            fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                let s = String::deserialize(d)?;
                s.parse().map_err(serde::de::Error::custom)
            }
        }
    };
}

choice_enum!(
    /// Multinomial Naive Bayes, or its complement form.
    ModelKind { Multinomial => "multinomial", Complement => "complement" }
);
choice_enum!(
    /// Where class priors come from.
    PriorKind { Learned => "learned", Uniform => "uniform", Given => "given" }
);
choice_enum!(
    /// Exact interned vocabulary, or feature hashing into fixed buckets.
    VocabularyKind { Interned => "interned", Hashed => "hashed" }
);

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelSettings {
    pub kind: ModelKind,
    pub alpha: f64,
    pub priors: PriorKind,
    pub given_priors: BTreeMap<String, f64>,
    pub vocabulary: VocabularyKind,
    pub max_vocabulary: usize,
    pub hash_buckets: usize,
    pub explain_terms: usize,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReviewSettings {
    pub min_confidence: f64,
    pub min_margin: f64,
    pub class_min_confidence: BTreeMap<String, f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrainSettings {
    pub progress_min_rows: usize,
}

choice_enum!(
    /// Where the service reads records from.
    SourceKind { Stdin => "stdin", File => "file", Kafka => "kafka" }
);
choice_enum!(
    /// Where the service writes decisions, reviews and dead letters.
    SinkKind { Stdout => "stdout", File => "file", Kafka => "kafka" }
);
choice_enum!(
    /// How a record's bytes become fields: a JSON object, or one plain text line.
    CodecKind { Json => "json", Text => "text" }
);

/// The streaming service as a whole (`sieveline run`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ServiceSettings {
    pub model: String,
    pub drain_timeout_ms: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SourceSettings {
    pub kind: SourceKind,
    pub codec: CodecKind,
    pub path: String,
    pub topics: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SinkSettings {
    pub kind: SinkKind,
    pub path: String,
}

/// Kafka client settings; `properties` go to librdkafka unchanged (both clients).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct KafkaSettings {
    pub bootstrap_servers: String,
    pub group_id: String,
    pub properties: BTreeMap<String, String>,
    pub consumer_properties: BTreeMap<String, String>,
    pub producer_properties: BTreeMap<String, String>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RoutingSettings {
    pub topic_template: String,
    pub review_topic: String,
    pub create_missing_topics: bool,
    pub create_partitions: i32,
    pub create_replication_factor: i32,
    pub metadata_refresh_ms: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DeadLetterSettings {
    pub topic: String,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DeliverySettings {
    pub max_in_flight_per_partition: usize,
    pub commit_interval_ms: u64,
    pub revoke_drain_ms: u64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AdminSettings {
    pub enabled: bool,
    pub bind: String,
    pub token: String,
}

/// librdkafka properties the service sets itself, because delivery guarantees depend on them.
pub const KAFKA_RESERVED_PROPERTIES: &[&str] =
    &["enable.auto.offset.store", "enable.idempotence", "enable.auto.commit", "group.id", "auto.commit.interval.ms"];

/// A librdkafka property name as written in settings: dots as they are, and
/// underscores read as dots, so `session_timeout_ms` works in environment overrides.
pub fn kafka_property_name(key: &str) -> String {
    key.replace('_', ".")
}

choice_enum!(
    /// How hand-written rules and the model share decisions (docs/rules.md).
    BlendMode {
        RulesOnly => "rules_only",
        RulesFirst => "rules_first",
        ModelFirst => "model_first",
        Takeover => "takeover",
    }
);

/// Hand-written rules and how they blend with the model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RulesSettings {
    /// Rules file (TOML); empty for none.
    pub path: String,
    pub blend: BlendMode,
    /// `takeover`: a class's non-guard rules step aside once the model has this many labels for it.
    pub takeover_labels: u64,
    /// `model_first`: the log-odds a non-guard assign rule adds to its class.
    pub assign_boost: f64,
}

/// Hot reload of the model and rules files in the service.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReloadSettings {
    /// Watch the model and rules files and reload on change.
    pub watch: bool,
    /// Quiet time after the last change to a file before it is reloaded.
    pub debounce_ms: u64,
}

choice_enum!(
    /// What the learner does with a label for a class the model does not have.
    UnknownClasses { Reject => "reject", Add => "add" }
);

/// Online learning from label events (`docs/learning.md`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LearningSettings {
    pub enabled: bool,
    /// The learned-label topic: complete events, read by every replica by assignment.
    pub label_topic: String,
    /// Id-only labels, co-partitioned with the input and resolved by the replica that scored the record; "" for none.
    pub raw_label_topic: String,
    /// Non-Kafka sources: a file of complete label events, followed as it grows; "" for none.
    pub label_path: String,
    pub unknown_classes: UnknownClasses,
    /// A new view is published at most this long after a label is applied.
    pub publish_interval_ms: u64,
    /// Label events read ahead of the learner (bounded queue).
    pub queue_capacity: usize,
    /// Recently scored records kept to resolve id-only labels.
    pub recent_capacity: usize,
    pub recent_ttl_ms: u64,
    /// How often the label topic's partition list is refreshed.
    pub partition_refresh_ms: u64,
    /// At start, wait at most this long for the label log to be read to its end before scoring.
    pub catch_up_timeout_ms: u64,
}

/// Model snapshots written by the service.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SnapshotSettings {
    /// Where snapshots are written (atomically); "" for none.
    pub path: String,
    pub interval_ms: u64,
}

impl Settings {
    fn validate_learning(&self) -> Result<(), SettingsError> {
        let l = &self.learning;
        if l.enabled && self.source.kind == SourceKind::Kafka && !valid_topic(&l.label_topic) {
            return Err(invalid("learning.label_topic", &l.label_topic, "a topic name when learning is on with a Kafka source"));
        }
        if !l.raw_label_topic.is_empty() {
            if !valid_topic(&l.raw_label_topic) {
                return Err(invalid("learning.raw_label_topic", &l.raw_label_topic, "a topic name, or \"\" for none"));
            }
            if l.enabled && self.source.kind != SourceKind::Kafka {
                return Err(invalid("learning.raw_label_topic", &l.raw_label_topic, "\"\" unless source.kind = \"kafka\" (id-only labels are resolved by the replica that consumed the record)"));
            }
            if self.source.topics.contains(&l.raw_label_topic) || l.raw_label_topic == l.label_topic {
                return Err(invalid("learning.raw_label_topic", &l.raw_label_topic, "a topic that is neither a source topic nor learning.label_topic"));
            }
        }
        if l.enabled && self.source.kind == SourceKind::Kafka && self.source.topics.contains(&l.label_topic) {
            return Err(invalid("learning.label_topic", &l.label_topic, "a topic that is not also a source topic"));
        }
        if !(1..=60_000).contains(&l.publish_interval_ms) {
            return Err(invalid("learning.publish_interval_ms", l.publish_interval_ms, "1 to 60000 milliseconds"));
        }
        if !(1..=1_000_000).contains(&l.queue_capacity) {
            return Err(invalid("learning.queue_capacity", l.queue_capacity, "1 to 1000000"));
        }
        if !(1..=100_000_000).contains(&l.recent_capacity) {
            return Err(invalid("learning.recent_capacity", l.recent_capacity, "1 to 100000000"));
        }
        if l.recent_ttl_ms == 0 {
            return Err(invalid("learning.recent_ttl_ms", l.recent_ttl_ms, "at least 1 millisecond"));
        }
        if !(100..=3_600_000).contains(&l.partition_refresh_ms) {
            return Err(invalid("learning.partition_refresh_ms", l.partition_refresh_ms, "100 to 3600000 milliseconds"));
        }
        if l.catch_up_timeout_ms > 3_600_000 {
            return Err(invalid("learning.catch_up_timeout_ms", l.catch_up_timeout_ms, "0 to 3600000 milliseconds"));
        }
        if l.enabled && !l.raw_label_topic.is_empty() {
            for props in [&self.kafka.properties, &self.kafka.consumer_properties] {
                if let Some((k, v)) = props.iter().find(|(k, _)| kafka_property_name(k) == "partition.assignment.strategy") {
                    return Err(invalid(
                        &format!("kafka.{k}"),
                        v,
                        "no value while learning.raw_label_topic is set: the service uses the range assignor so raw labels reach the replica that scored their record",
                    ));
                }
            }
        }
        if !(100..=86_400_000).contains(&self.snapshot.interval_ms) {
            return Err(invalid("snapshot.interval_ms", self.snapshot.interval_ms, "100 to 86400000 milliseconds"));
        }
        Ok(())
    }
}

impl Settings {
    fn validate_reload(&self) -> Result<(), SettingsError> {
        let d = self.reload.debounce_ms;
        if !(10..=60_000).contains(&d) {
            return Err(invalid("reload.debounce_ms", d, "an integer from 10 to 60000 (milliseconds)"));
        }
        if self.reload.watch && !self.snapshot.path.is_empty() && self.snapshot.path == self.service.model {
            return Err(invalid(
                "snapshot.path",
                &self.snapshot.path,
                "a file other than service.model while reload.watch is on (every snapshot written would be reloaded as a new model file)",
            ));
        }
        Ok(())
    }

    fn validate_rules(&self) -> Result<(), SettingsError> {
        let r = &self.rules;
        if r.takeover_labels == 0 || r.takeover_labels > 1_000_000_000 {
            return Err(invalid("rules.takeover_labels", r.takeover_labels, "an integer from 1 to 1000000000"));
        }
        if !(r.assign_boost.is_finite() && r.assign_boost > 0.0 && r.assign_boost <= 50.0) {
            return Err(invalid("rules.assign_boost", r.assign_boost, "a number of log-odds above 0, at most 50"));
        }
        Ok(())
    }
}

/// A Kafka topic the service reads or writes under these settings (see [`Settings::kafka_topics`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TopicNeed {
    pub name: String,
    /// What it is for: "source", "review", "dead letters", "class" (the class is in `class`).
    pub role: &'static str,
    /// The class a class topic is for.
    pub class: Option<String>,
    /// The service consumes it (`Read`) or produces to it (`Write`).
    pub access: TopicAccess,
    /// False when the service creates it if missing (`routing.create_missing_topics`).
    pub must_exist: bool,
    /// Read through the consumer group (`kafka.group_id`, offsets committed), as source topics
    /// are; false for topics read by assignment or written.
    pub via_group: bool,
}

/// How the service uses a topic, which is also the ACL it needs beside Describe.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TopicAccess {
    Read,
    Write,
}

/// The destination topic of `class` under `template`: `{class}` replaced by the class,
/// with characters a topic name cannot hold turned into `_`.
pub fn fill_topic_template(template: &str, class: &str) -> String {
    if !template.contains("{class}") {
        return template.to_string();
    }
    let safe: String = class
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() || c == '.' || c == '_' || c == '-' { c } else { '_' })
        .collect();
    template.replace("{class}", &safe)
}

impl Settings {
    /// Every Kafka topic these settings make the service use, in a stable order without
    /// repeats: source topics (Kafka source), then review, dead-letter and one class topic
    /// per class in `classes` (Kafka sink; the classes of the model and the rules, when known).
    /// The one list `check-config` checks; new topic kinds (label topics) belong here.
    pub fn kafka_topics(&self, classes: &[String]) -> Vec<TopicNeed> {
        let mut out: Vec<TopicNeed> = Vec::new();
        let mut push = |name: String, role: &'static str, class: Option<String>, access: TopicAccess, must_exist: bool| {
            if !out.iter().any(|t| t.name == name) {
                let via_group = role == "source" || role == "raw labels";
                out.push(TopicNeed { name, role, class, access, must_exist, via_group });
            }
        };
        if self.source.kind == SourceKind::Kafka {
            for t in &self.source.topics {
                push(t.clone(), "source", None, TopicAccess::Read, true);
            }
        }
        if self.sink.kind == SinkKind::Kafka {
            let created = self.routing.create_missing_topics;
            push(self.routing.review_topic.clone(), "review", None, TopicAccess::Write, !created);
            push(self.dead_letter.topic.clone(), "dead letters", None, TopicAccess::Write, !created);
            for c in classes {
                let name = fill_topic_template(&self.routing.topic_template, c);
                push(name, "class", Some(c.clone()), TopicAccess::Write, !created);
            }
        }
        if self.learning.enabled && self.source.kind == SourceKind::Kafka {
            // Read by every replica by assignment; written when raw labels are resolved.
            push(self.learning.label_topic.clone(), "learned labels", None, TopicAccess::Read, true);
            if !self.learning.raw_label_topic.is_empty() {
                push(self.learning.raw_label_topic.clone(), "raw labels", None, TopicAccess::Read, true);
            }
        }
        out
    }
}

choice_enum!(
    /// What the predicted-class mix is compared with (docs/drift.md).
    DriftReference { Priors => "priors", Baseline => "baseline", Trailing => "trailing" }
);

/// Drift and health statistics of the service (docs/drift.md).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriftSettings {
    pub enabled: bool,
    pub window_records: usize,
    pub publish_every_records: u64,
    pub publish_interval_ms: u64,
    pub reference: DriftReference,
    pub baseline_skip_records: u64,
    pub baseline_records: u64,
    pub min_records: u64,
    pub psi_floor: f64,
    pub feedback_window_labels: usize,
    pub feedback_min_class_labels: u64,
    pub page_hinkley_delta: f64,
    pub page_hinkley_lambda: f64,
    pub page_hinkley_min_labels: u64,
    pub change_hold_labels: u64,
    pub consumer_lag_interval_ms: u64,
    pub thresholds: DriftThresholds,
}

/// Thresholds shown beside each indicator on the status page; the same numbers as `deploy/prometheus/alerts.yml`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriftThresholds {
    pub psi_moderate: f64,
    pub psi_major: f64,
    pub js_divergence_bits: f64,
    pub oov_token_ratio: f64,
    pub oov_record_ratio: f64,
    pub review_ratio: f64,
    pub feedback_accuracy: f64,
    pub feedback_min_labels: u64,
}

/// The status page at `/` of the admin endpoint.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StatusPageSettings {
    pub enabled: bool,
    pub recent_reviews: usize,
    pub text_chars: usize,
    pub sample_interval_ms: u64,
    pub history_points: usize,
    pub throughput_window_ms: u64,
    pub refresh_ms: u64,
}

impl Settings {
    fn validate_drift(&self) -> Result<(), SettingsError> {
        let d = &self.drift;
        if !(10..=10_000_000).contains(&d.window_records) {
            return Err(invalid("drift.window_records", d.window_records, "10 to 10000000 records"));
        }
        if !(1..=10_000_000).contains(&d.publish_every_records) {
            return Err(invalid("drift.publish_every_records", d.publish_every_records, "1 to 10000000 records"));
        }
        if !(10..=3_600_000).contains(&d.publish_interval_ms) {
            return Err(invalid("drift.publish_interval_ms", d.publish_interval_ms, "10 to 3600000 milliseconds"));
        }
        if !(1..=10_000_000).contains(&d.baseline_records) {
            return Err(invalid("drift.baseline_records", d.baseline_records, "1 to 10000000 records"));
        }
        if d.baseline_skip_records > 10_000_000 {
            return Err(invalid("drift.baseline_skip_records", d.baseline_skip_records, "0 to 10000000 records"));
        }
        if d.min_records < 1 || d.min_records > d.window_records as u64 {
            return Err(invalid("drift.min_records", d.min_records, "1 to drift.window_records"));
        }
        if !(d.psi_floor > 0.0 && d.psi_floor <= 0.01) {
            return Err(invalid("drift.psi_floor", d.psi_floor, "a proportion above 0, at most 0.01"));
        }
        if !(1..=10_000_000).contains(&d.feedback_window_labels) {
            return Err(invalid("drift.feedback_window_labels", d.feedback_window_labels, "1 to 10000000 labels"));
        }
        if d.feedback_min_class_labels < 1 {
            return Err(invalid("drift.feedback_min_class_labels", d.feedback_min_class_labels, "at least 1"));
        }
        if !(d.page_hinkley_delta.is_finite() && (0.0..1.0).contains(&d.page_hinkley_delta)) {
            return Err(invalid("drift.page_hinkley_delta", d.page_hinkley_delta, "a number from 0 to below 1"));
        }
        if !(d.page_hinkley_lambda.is_finite() && d.page_hinkley_lambda > 0.0) {
            return Err(invalid("drift.page_hinkley_lambda", d.page_hinkley_lambda, "a number above 0"));
        }
        if d.page_hinkley_min_labels < 1 {
            return Err(invalid("drift.page_hinkley_min_labels", d.page_hinkley_min_labels, "at least 1"));
        }
        if d.consumer_lag_interval_ms != 0 && !(100..=3_600_000).contains(&d.consumer_lag_interval_ms) {
            return Err(invalid(
                "drift.consumer_lag_interval_ms",
                d.consumer_lag_interval_ms,
                "0 (off) or 100 to 3600000 milliseconds",
            ));
        }
        let t = &d.thresholds;
        for (key, v) in [
            ("drift.thresholds.psi_moderate", t.psi_moderate),
            ("drift.thresholds.psi_major", t.psi_major),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(invalid(key, v, "a number above 0"));
            }
        }
        if t.psi_moderate > t.psi_major {
            return Err(invalid("drift.thresholds.psi_moderate", t.psi_moderate, "at most drift.thresholds.psi_major"));
        }
        for (key, v) in [
            ("drift.thresholds.js_divergence_bits", t.js_divergence_bits),
            ("drift.thresholds.oov_token_ratio", t.oov_token_ratio),
            ("drift.thresholds.oov_record_ratio", t.oov_record_ratio),
            ("drift.thresholds.review_ratio", t.review_ratio),
            ("drift.thresholds.feedback_accuracy", t.feedback_accuracy),
        ] {
            if !(0.0..=1.0).contains(&v) {
                return Err(invalid(key, v, "a number from 0 to 1"));
            }
        }
        let p = &self.status_page;
        if p.recent_reviews > 1000 {
            return Err(invalid("status_page.recent_reviews", p.recent_reviews, "0 to 1000 records"));
        }
        if !(1..=10_000).contains(&p.text_chars) {
            return Err(invalid("status_page.text_chars", p.text_chars, "1 to 10000 characters"));
        }
        if !(100..=3_600_000).contains(&p.sample_interval_ms) {
            return Err(invalid("status_page.sample_interval_ms", p.sample_interval_ms, "100 to 3600000 milliseconds"));
        }
        if !(2..=100_000).contains(&p.history_points) {
            return Err(invalid("status_page.history_points", p.history_points, "2 to 100000 points"));
        }
        if p.throughput_window_ms < p.sample_interval_ms || p.throughput_window_ms > 3_600_000 {
            return Err(invalid(
                "status_page.throughput_window_ms",
                p.throughput_window_ms,
                "status_page.sample_interval_ms to 3600000 milliseconds",
            ));
        }
        if !(100..=600_000).contains(&p.refresh_ms) {
            return Err(invalid("status_page.refresh_ms", p.refresh_ms, "100 to 600000 milliseconds"));
        }
        Ok(())
    }
}

impl Settings {
    /// Defaults, then `file` (if any), then the process environment.
    pub fn load(file: Option<&Path>) -> Result<Settings, SettingsError> {
        Self::load_with_env(file, std::env::vars())
    }

    /// As `load`, with an explicit environment (for tests).
    pub fn load_with_env(
        file: Option<&Path>,
        env: impl IntoIterator<Item = (String, String)>,
    ) -> Result<Settings, SettingsError> {
        let mut builder = Config::builder();
        match file {
            None => builder = builder.add_source(File::from_str(DEFAULT_TOML, FileFormat::Toml)),
            Some(path) => {
                let text = std::fs::read_to_string(path).map_err(|e| SettingsError::Read {
                    path: path.display().to_string(),
                    reason: e.to_string(),
                })?;
                // Parse on our own first so a syntax error names the file and line.
                let user: toml::Value = toml::from_str(&text).map_err(|e| SettingsError::Syntax {
                    path: path.display().to_string(),
                    reason: e.to_string(),
                })?;
                // An array of tables in the user file replaces the default array
                // whole; the config crate would otherwise merge it index by index.
                let base = if user.get("input").and_then(|i| i.get("fields")).is_some() {
                    defaults_without_fields()
                } else {
                    DEFAULT_TOML.to_string()
                };
                builder = builder
                    .add_source(File::from_str(&base, FileFormat::Toml))
                    .add_source(File::from_str(&text, FileFormat::Toml));
            }
        }
        let env_map: config::Map<String, String> = env
            .into_iter()
            .filter(|(k, _)| k.starts_with(&format!("{ENV_PREFIX}{ENV_SEPARATOR}")))
            .collect();
        builder = builder.add_source(
            Environment::with_prefix(ENV_PREFIX)
                .prefix_separator(ENV_SEPARATOR)
                .separator(ENV_SEPARATOR)
                .try_parsing(true)
                // List settings take comma-separated values: SIEVELINE__SOURCE__TOPICS=a.in,b.in
                .list_separator(",")
                .with_list_parse_key("source.topics")
                .source(Some(env_map)),
        );
        let cfg = builder.build().map_err(|e| SettingsError::Merge(e.to_string()))?;
        let raw: Settings = cfg.try_deserialize().map_err(|e| SettingsError::Shape(e.to_string()))?;
        raw.validate()?;
        Ok(raw)
    }

    /// Parse one TOML text over the defaults, without the environment (for tests and tools).
    pub fn from_toml_str(text: &str) -> Result<Settings, SettingsError> {
        let dir = std::env::temp_dir().join(format!("sieveline-settings-{}", std::process::id()));
        std::fs::create_dir_all(&dir).map_err(|e| SettingsError::Read {
            path: dir.display().to_string(),
            reason: e.to_string(),
        })?;
        let path = dir.join(format!("s{}.toml", unique_suffix()));
        std::fs::write(&path, text).map_err(|e| SettingsError::Read {
            path: path.display().to_string(),
            reason: e.to_string(),
        })?;
        let out = Self::load_with_env(Some(&path), std::iter::empty());
        let _ = std::fs::remove_file(&path);
        out
    }

    /// The defaults alone.
    pub fn defaults() -> Settings {
        Self::load_with_env(None, std::iter::empty()).expect("embedded defaults are valid")
    }

    /// Check every value once; the error names the key, the value and what is allowed.
    pub fn validate(&self) -> Result<(), SettingsError> {
        self.validate_rules()?;
        self.validate_reload()?;
        self.validate_learning()?;
        self.validate_drift()?;
        let a = &self.analyzer;
        if a.min_token_len == 0 || a.min_token_len > a.max_token_len {
            return Err(invalid(
                "analyzer.min_token_len",
                a.min_token_len,
                "an integer from 1 to analyzer.max_token_len",
            ));
        }
        if a.max_token_len == 0 || a.max_token_len > 1024 {
            return Err(invalid("analyzer.max_token_len", a.max_token_len, "an integer from 1 to 1024"));
        }
        let mut names = std::collections::BTreeSet::new();
        for (i, p) in a.patterns.iter().enumerate() {
            let key = format!("analyzer.patterns[{i}].name");
            if p.name.is_empty()
                || !p.name.chars().all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
            {
                return Err(invalid(&key, &p.name, "a non-empty name of a-z, 0-9 and _"));
            }
            if !names.insert(p.name.clone()) {
                return Err(invalid(&key, &p.name, "a name not used by another pattern"));
            }
            if let Err(e) = regex::Regex::new(&p.regex) {
                return Err(invalid(
                    &format!("analyzer.patterns[{i}].regex"),
                    &p.regex,
                    &format!("a valid regular expression ({})", first_line(&e.to_string())),
                ));
            }
        }
        let inp = &self.input;
        if inp.id_field.is_empty() {
            return Err(invalid("input.id_field", "", "a non-empty field path"));
        }
        if inp.label_field.is_empty() {
            return Err(invalid("input.label_field", "", "a non-empty field path"));
        }
        if inp.max_record_bytes < 16 {
            return Err(invalid("input.max_record_bytes", inp.max_record_bytes, "at least 16"));
        }
        if inp.fields.is_empty() {
            return Err(invalid("input.fields", "[]", "at least one text field"));
        }
        for (i, f) in inp.fields.iter().enumerate() {
            if f.name.is_empty() {
                return Err(invalid(&format!("input.fields[{i}].name"), "", "a non-empty field path"));
            }
            check_weight(&format!("input.fields[{i}].weight"), f.weight)?;
        }
        let m = &self.model;
        if !(m.alpha.is_finite() && m.alpha >= 1e-10 && m.alpha <= 1e6) {
            return Err(invalid("model.alpha", m.alpha, "a number from 1e-10 to 1e6"));
        }
        if m.priors == PriorKind::Given {
            if m.given_priors.is_empty() {
                return Err(invalid(
                    "model.given_priors",
                    "{}",
                    "at least one class -> probability when model.priors = \"given\"",
                ));
            }
            for (class, p) in &m.given_priors {
                if !(p.is_finite() && *p > 0.0 && *p <= 1.0) {
                    return Err(invalid(&format!("model.given_priors.{class}"), p, "a probability in (0, 1]"));
                }
            }
        }
        if m.max_vocabulary == 0 || m.max_vocabulary > u32::MAX as usize - 1 {
            return Err(invalid("model.max_vocabulary", m.max_vocabulary, "an integer from 1 to 4294967294"));
        }
        if m.hash_buckets == 0 || m.hash_buckets > (1 << 28) {
            return Err(invalid("model.hash_buckets", m.hash_buckets, "an integer from 1 to 268435456"));
        }
        if m.explain_terms > 64 {
            return Err(invalid("model.explain_terms", m.explain_terms, "an integer from 0 to 64"));
        }
        let r = &self.review;
        if !(0.0..=1.0).contains(&r.min_confidence) {
            return Err(invalid("review.min_confidence", r.min_confidence, "a number from 0 to 1"));
        }
        if !(r.min_margin.is_finite() && r.min_margin >= 0.0) {
            return Err(invalid("review.min_margin", r.min_margin, "a number >= 0"));
        }
        for (class, t) in &r.class_min_confidence {
            if !(0.0..=1.0).contains(t) {
                return Err(invalid(&format!("review.class_min_confidence.{class}"), t, "a number from 0 to 1"));
            }
        }
        self.validate_service()
    }

    /// The service sections: sources, sinks, Kafka, routing, delivery, admin.
    fn validate_service(&self) -> Result<(), SettingsError> {
        if self.service.drain_timeout_ms == 0 || self.service.drain_timeout_ms > 3_600_000 {
            return Err(invalid("service.drain_timeout_ms", self.service.drain_timeout_ms, "1 to 3600000 milliseconds"));
        }
        if self.source.kind == SourceKind::File && self.source.path.is_empty() {
            return Err(invalid("source.path", "", "a file path when source.kind = \"file\""));
        }
        if self.sink.kind == SinkKind::File && self.sink.path.is_empty() {
            return Err(invalid("sink.path", "", "a file path when sink.kind = \"file\""));
        }
        let uses_kafka = self.source.kind == SourceKind::Kafka || self.sink.kind == SinkKind::Kafka;
        if self.source.kind == SourceKind::Kafka {
            if self.source.topics.is_empty() || self.source.topics.iter().any(|t| !valid_topic(t)) {
                return Err(invalid(
                    "source.topics",
                    format!("{:?}", self.source.topics),
                    "at least one topic name of a-z, A-Z, 0-9, '.', '_' and '-' when source.kind = \"kafka\"",
                ));
            }
            if self.kafka.group_id.is_empty() {
                return Err(invalid("kafka.group_id", "", "a consumer group id when source.kind = \"kafka\""));
            }
        }
        if uses_kafka && self.kafka.bootstrap_servers.is_empty() {
            return Err(invalid("kafka.bootstrap_servers", "", "host:port[,host:port...] when Kafka is used"));
        }
        for (section, props) in [
            ("kafka.properties", &self.kafka.properties),
            ("kafka.consumer_properties", &self.kafka.consumer_properties),
            ("kafka.producer_properties", &self.kafka.producer_properties),
        ] {
            for key in props.keys() {
                let name = kafka_property_name(key);
                if KAFKA_RESERVED_PROPERTIES.contains(&name.as_str()) {
                    return Err(invalid(
                        &format!("{section}.{key}"),
                        &props[key],
                        "no value: the service sets this property itself (see [kafka], [delivery])",
                    ));
                }
            }
        }
        let t = &self.routing.topic_template;
        let probe = t.replace("{class}", "x");
        if t.is_empty() || probe.contains('{') || probe.contains('}') || !valid_topic(&probe) {
            return Err(invalid(
                "routing.topic_template",
                t,
                "a topic name that may contain {class}, otherwise only a-z, A-Z, 0-9, '.', '_' and '-'",
            ));
        }
        if !valid_topic(&self.routing.review_topic) {
            return Err(invalid("routing.review_topic", &self.routing.review_topic, "a topic name"));
        }
        if !valid_topic(&self.dead_letter.topic) {
            return Err(invalid("dead_letter.topic", &self.dead_letter.topic, "a topic name"));
        }
        if !(1..=10_000).contains(&self.routing.create_partitions) {
            return Err(invalid("routing.create_partitions", self.routing.create_partitions, "1 to 10000"));
        }
        if !(1..=32).contains(&self.routing.create_replication_factor) {
            return Err(invalid("routing.create_replication_factor", self.routing.create_replication_factor, "1 to 32"));
        }
        if self.routing.metadata_refresh_ms < 100 {
            return Err(invalid("routing.metadata_refresh_ms", self.routing.metadata_refresh_ms, "at least 100"));
        }
        let d = &self.delivery;
        if !(1..=100_000).contains(&d.max_in_flight_per_partition) {
            return Err(invalid("delivery.max_in_flight_per_partition", d.max_in_flight_per_partition, "1 to 100000"));
        }
        if !(10..=600_000).contains(&d.commit_interval_ms) {
            return Err(invalid("delivery.commit_interval_ms", d.commit_interval_ms, "10 to 600000 milliseconds"));
        }
        if !(1..=600_000).contains(&d.revoke_drain_ms) {
            return Err(invalid("delivery.revoke_drain_ms", d.revoke_drain_ms, "1 to 600000 milliseconds"));
        }
        let a = &self.admin;
        match a.bind.parse::<std::net::SocketAddr>() {
            Err(_) => return Err(invalid("admin.bind", &a.bind, "an IP address and port, e.g. 127.0.0.1:9464")),
            Ok(addr) if !addr.ip().is_loopback() && a.token.is_empty() => {
                return Err(invalid(
                    "admin.token",
                    "",
                    "a bearer token when admin.bind is not a loopback address",
                ))
            }
            Ok(_) => {}
        }
        Ok(())
    }
}

/// A weight is positive, at most `MAX_WEIGHT`, and a multiple of `WEIGHT_QUANTUM`.
pub fn check_weight(key: &str, w: f64) -> Result<(), SettingsError> {
    let q = w / WEIGHT_QUANTUM;
    if !(w.is_finite() && w >= WEIGHT_QUANTUM && w <= MAX_WEIGHT && q == q.round()) {
        return Err(invalid(
            key,
            w,
            "a multiple of 1/16 (0.0625) from 0.0625 to 64, so learned counts stay exact",
        ));
    }
    Ok(())
}

/// A legal Kafka topic name: 1 to 249 of a-z, A-Z, 0-9, '.', '_' and '-', not "." or "..".
pub fn valid_topic(t: &str) -> bool {
    !t.is_empty()
        && t.len() <= 249
        && t != "."
        && t != ".."
        && t.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'.' || b == b'_' || b == b'-')
}

fn invalid(key: &str, value: impl std::fmt::Display, allowed: &str) -> SettingsError {
    SettingsError::Invalid { key: key.to_string(), value: value.to_string(), allowed: allowed.to_string() }
}

fn first_line(s: &str) -> String {
    s.lines().filter(|l| !l.trim().is_empty()).last().unwrap_or("").trim().to_string()
}

fn defaults_without_fields() -> String {
    let mut v: toml::Value = toml::from_str(DEFAULT_TOML).expect("embedded defaults parse");
    if let Some(input) = v.get_mut("input").and_then(|i| i.as_table_mut()) {
        input.remove("fields");
    }
    toml::to_string(&v).expect("defaults serialize")
}

fn unique_suffix() -> u64 {
    use std::sync::atomic::{AtomicU64, Ordering};
    static N: AtomicU64 = AtomicU64::new(0);
    N.fetch_add(1, Ordering::Relaxed)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn env(pairs: &[(&str, &str)]) -> Vec<(String, String)> {
        pairs.iter().map(|(k, v)| (k.to_string(), v.to_string())).collect()
    }

    #[test]
    fn defaults_load_and_validate() {
        let s = Settings::defaults();
        assert_eq!(s.model.alpha, 1.0);
        assert_eq!(s.input.fields.len(), 3);
        assert_eq!(s.input.fields[0].weight, 2.0);
        assert!(s.analyzer.collapse.numbers);
    }

    #[test]
    fn reload_settings_are_checked() {
        let e = Settings::from_toml_str("[reload]\ndebounce_ms = 0\n").unwrap_err().to_string();
        assert!(e.contains("reload.debounce_ms"), "{e}");
        let e = Settings::from_toml_str("[service]\nmodel = \"m.svm\"\n[snapshot]\npath = \"m.svm\"\n").unwrap_err().to_string();
        assert!(e.contains("snapshot.path") && e.contains("reload.watch"), "{e}");
        let s = Settings::from_toml_str("[service]\nmodel = \"m.svm\"\n[snapshot]\npath = \"m.svm\"\n[reload]\nwatch = false\n").unwrap();
        assert!(!s.reload.watch);
        let e = Settings::from_toml_str("[reload]\nwatch = true\nwatch_dirs = 1\n").unwrap_err().to_string();
        assert!(e.contains("watch_dirs"), "unknown keys are errors: {e}");
    }

    #[test]
    fn env_override_reaches_nested_key() {
        let s = Settings::load_with_env(None, env(&[("SIEVELINE__MODEL__ALPHA", "0.25")])).unwrap();
        assert_eq!(s.model.alpha, 0.25);
        let s = Settings::load_with_env(None, env(&[("SIEVELINE__ANALYZER__BIGRAMS", "true")])).unwrap();
        assert!(s.analyzer.bigrams);
    }

    #[test]
    fn unrelated_env_vars_with_similar_names_are_not_read() {
        let s = Settings::load_with_env(None, env(&[("SIEVELINE_DATA_DIR", "/x")])).unwrap();
        assert_eq!(s, Settings::defaults());
    }

    #[test]
    fn list_settings_take_comma_separated_env_values() {
        let s = Settings::load_with_env(None, env(&[("SIEVELINE__SOURCE__TOPICS", "tickets.in,tickets.late")])).unwrap();
        assert_eq!(s.source.topics, ["tickets.in", "tickets.late"]);
        let s = Settings::load_with_env(None, env(&[("SIEVELINE__SOURCE__TOPICS", "tickets.in")])).unwrap();
        assert_eq!(s.source.topics, ["tickets.in"]);
        // Other strings stay strings, commas and all.
        let s = Settings::load_with_env(None, env(&[("SIEVELINE__KAFKA__BOOTSTRAP_SERVERS", "b1:9092,b2:9092")])).unwrap();
        assert_eq!(s.kafka.bootstrap_servers, "b1:9092,b2:9092");
    }

    #[test]
    fn typo_in_env_key_is_an_error() {
        let e = Settings::load_with_env(None, env(&[("SIEVELINE__MODEL__ALHPA", "0.5")])).unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains("alhpa"), "{msg}");
    }

    #[test]
    fn typo_in_file_key_is_an_error_naming_it() {
        let e = Settings::from_toml_str("[model]\nalpah = 0.5\n").unwrap_err().to_string();
        assert!(e.contains("alpah"), "{e}");
        let e = Settings::from_toml_str("[modle]\nalpha = 0.5\n").unwrap_err().to_string();
        assert!(e.contains("modle"), "{e}");
    }

    #[test]
    fn bad_value_names_key_value_and_allowed() {
        let e = Settings::from_toml_str("[model]\nalpha = -1.0\n").unwrap_err().to_string();
        assert!(e.contains("model.alpha") && e.contains("-1") && e.contains("1e-10"), "{e}");
        let e = Settings::from_toml_str("[model]\nkind = \"bernoulli\"\n").unwrap_err().to_string();
        assert!(e.contains("bernoulli") && e.contains("multinomial"), "{e}");
    }

    #[test]
    fn non_dyadic_weight_is_refused() {
        let e = Settings::from_toml_str("[[input.fields]]\nname = \"body\"\nweight = 0.3\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("input.fields[0].weight") && e.contains("0.3") && e.contains("1/16"), "{e}");
    }

    #[test]
    fn user_fields_replace_default_fields_whole() {
        let s = Settings::from_toml_str("[[input.fields]]\nname = \"message\"\nweight = 1.5\n").unwrap();
        assert_eq!(s.input.fields, vec![FieldSetting { name: "message".into(), weight: 1.5 }]);
    }

    #[test]
    fn bad_pattern_regex_is_refused() {
        let e = Settings::from_toml_str("[[analyzer.patterns]]\nname = \"order_no\"\nregex = \"(\"\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("analyzer.patterns[0].regex"), "{e}");
    }

    #[test]
    fn kafka_topics_follow_source_sink_and_classes() {
        assert!(Settings::defaults().kafka_topics(&["a".into()]).is_empty(), "stdin to stdout uses no topic");
        let s = Settings::from_toml_str(
            "[source]\nkind = \"kafka\"\ntopics = [\"in.a\", \"in.b\"]\n[sink]\nkind = \"kafka\"\n\
             [routing]\ntopic_template = \"out.{class}\"\nreview_topic = \"out.review\"\n",
        )
        .unwrap();
        let classes = vec!["billing".to_string(), "lost parcel".to_string(), "review".to_string()];
        let t = s.kafka_topics(&classes);
        let names: Vec<&str> = t.iter().map(|t| t.name.as_str()).collect();
        assert_eq!(names, ["in.a", "in.b", "out.review", "sieveline.dead-letters", "out.billing", "out.lost_parcel"]);
        assert_eq!(t[0].access, TopicAccess::Read);
        assert!(t[0].via_group && t[1].via_group && t.iter().skip(2).all(|t| !t.via_group));
        assert!(t.iter().skip(2).all(|t| t.access == TopicAccess::Write && t.must_exist));
        assert_eq!(t[5].class.as_deref(), Some("lost parcel"));
        // "review" as a class maps onto the review topic: listed once, as the review topic.
        assert_eq!(t[2].role, "review");
        let mut c = s.clone();
        c.routing.create_missing_topics = true;
        assert!(c.kafka_topics(&classes).iter().filter(|t| t.access == TopicAccess::Write).all(|t| !t.must_exist));
        // Learning adds the learned-label topic (by assignment) and the raw label topic (by group).
        let mut l = s.clone();
        l.learning.enabled = true;
        l.learning.raw_label_topic = "labels.raw".into();
        let t = l.kafka_topics(&classes);
        let last: Vec<(&str, bool)> = t.iter().rev().take(2).map(|t| (t.name.as_str(), t.via_group)).collect();
        assert_eq!(last, [("labels.raw", true), ("sieveline.labels", false)]);
    }

    #[test]
    fn syntax_error_names_the_file() {
        let e = Settings::from_toml_str("[model\n").unwrap_err().to_string();
        assert!(e.contains(".toml"), "{e}");
    }
}
