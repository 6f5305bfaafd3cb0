//! Pre-deploy checks against the brokers: can the client connect with the configured properties, does each topic the settings name exist (partition counts, leaders), may this client see it, and what state is the consumer group in. Reads metadata only; never creates a topic or joins the group.

use std::sync::Mutex;
use std::time::Duration;

use rdkafka::config::RDKafkaLogLevel;
use rdkafka::consumer::{BaseConsumer, Consumer, ConsumerContext};
use rdkafka::error::{KafkaError, RDKafkaErrorCode};
use rdkafka::{ClientContext, Offset, TopicPartitionList};
use serde::Serialize;

use super::config::consumer_config;
use crate::settings::{Settings, TopicAccess, TopicNeed};

/// What the brokers say about one topic.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(tag = "state", rename_all = "snake_case")]
pub enum TopicState {
    /// Exists; `leaderless` partitions have no leader right now.
    Ok { partitions: usize, leaderless: usize },
    Missing,
    /// The client's principal may not Describe the topic (a Kafka ACL).
    NotAuthorized,
    /// Any other error code, as the client names it.
    Error { code: String },
}

impl TopicState {
    /// Classify a metadata answer: the topic's error code (if any) and its partitions' leaders.
    pub fn from_metadata(error: Option<RDKafkaErrorCode>, leaders: &[i32]) -> TopicState {
        match error {
            None => TopicState::Ok { partitions: leaders.len(), leaderless: leaders.iter().filter(|l| **l < 0).count() },
            Some(RDKafkaErrorCode::UnknownTopicOrPartition) => TopicState::Missing,
            Some(RDKafkaErrorCode::TopicAuthorizationFailed) => TopicState::NotAuthorized,
            Some(code) => TopicState::Error { code: code.to_string() },
        }
    }
}

/// One configured topic and what the brokers said about it.
#[derive(Debug, Clone, Serialize)]
pub struct TopicCheck {
    pub name: String,
    pub role: &'static str,
    pub class: Option<String>,
    pub access: &'static str,
    pub must_exist: bool,
    #[serde(flatten)]
    pub state: TopicState,
}

impl TopicCheck {
    /// The problem this finding is for a deploy, if it is one: a sentence naming the topic and what to do.
    pub fn problem(&self) -> Option<String> {
        let what = match &self.class {
            Some(c) => format!("topic {} (class {c})", self.name),
            None => format!("topic {} ({})", self.name, self.role),
        };
        let acl = match self.access {
            "read" => "Describe and Read",
            _ => "Describe and Write",
        };
        match &self.state {
            TopicState::Ok { leaderless: 0, .. } => None,
            TopicState::Ok { leaderless, partitions } => {
                Some(format!("{what}: {leaderless} of {partitions} partitions have no leader"))
            }
            TopicState::Missing if !self.must_exist => None,
            TopicState::Missing => Some(match self.role {
                "source" => format!("{what} does not exist; create it before starting the service"),
                _ => format!("{what} does not exist; create it or set routing.create_missing_topics = true"),
            }),
            TopicState::NotAuthorized => Some(format!(
                "{what}: not authorized; the client's principal needs the {acl} ACLs on it (Kafka error TOPIC_AUTHORIZATION_FAILED)"
            )),
            TopicState::Error { code } => Some(format!("{what}: metadata error: {code}")),
        }
    }
}

/// The consumer group: its committed offsets on the source partitions (an OffsetFetch, which
/// needs the Describe ACL on the group) and the backlog it would resume with.
#[derive(Debug, Clone, Serialize)]
#[serde(tag = "state", rename_all = "snake_case")]
pub enum GroupCheck {
    Described {
        id: String,
        /// Source partitions with a committed offset, of `partitions`.
        committed: usize,
        partitions: usize,
        /// Records between the committed offsets (the earliest offset where none is committed)
        /// and the end of each source partition: what the group would read next.
        backlog: i64,
        /// Members right now, as the group coordinator lists them (0 if it cannot say).
        members: usize,
    },
    NotAuthorized { id: String },
    Error { id: String, code: String },
}

impl GroupCheck {
    pub fn problem(&self) -> Option<String> {
        match self {
            GroupCheck::Described { .. } => None,
            GroupCheck::NotAuthorized { id } => Some(format!(
                "consumer group {id}: not authorized; the client's principal needs the Describe and Read ACLs on the group (Kafka error GROUP_AUTHORIZATION_FAILED)"
            )),
            GroupCheck::Error { id, code } => Some(format!("consumer group {id}: {code}")),
        }
    }
}

/// Everything the brokers told us.
#[derive(Debug, Clone, Serialize)]
pub struct ClusterCheck {
    pub bootstrap: String,
    pub brokers: usize,
    pub topics: Vec<TopicCheck>,
    pub group: Option<GroupCheck>,
}

impl ClusterCheck {
    pub fn problems(&self) -> Vec<String> {
        self.topics.iter().filter_map(TopicCheck::problem).chain(self.group.iter().filter_map(GroupCheck::problem)).collect()
    }
}

/// The brokers could not be reached, or refused the client as a whole (TLS, SASL).
#[derive(Debug, Clone)]
pub struct Unreachable {
    pub error: String,
    /// The client's own account of the last connection failure (e.g. "SASL authentication failed").
    pub detail: Option<String>,
}

impl std::fmt::Display for Unreachable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.detail {
            Some(d) => write!(f, "{}; last client error: {d}", self.error),
            None => write!(f, "{}", self.error),
        }
    }
}

/// Keeps the client's last error instead of logging every retry, so the report can name it once.
#[derive(Default)]
struct CheckContext {
    last_error: Mutex<Option<String>>,
    /// Codes of error events seen (e.g. a coordinator lookup refused for the group).
    codes: Mutex<Vec<RDKafkaErrorCode>>,
}

impl CheckContext {
    fn saw(&self, code: RDKafkaErrorCode) -> bool {
        self.codes.lock().expect("codes lock").contains(&code)
    }
}

impl ClientContext for CheckContext {
    fn log(&self, level: RDKafkaLogLevel, fac: &str, message: &str) {
        tracing::debug!("librdkafka {level:?} {fac}: {message}");
        if fac == "FAIL" {
            *self.last_error.lock().expect("error lock") = Some(message.to_string());
        }
    }
    fn error(&self, error: KafkaError, reason: &str) {
        // "All brokers are down" follows every failure; the failure itself says more.
        if let Some(code) = error.rdkafka_error_code() {
            self.codes.lock().expect("codes lock").push(code);
        }
        if error.rdkafka_error_code() != Some(RDKafkaErrorCode::AllBrokersDown) {
            *self.last_error.lock().expect("error lock") = Some(reason.to_string());
        }
    }
}

impl ConsumerContext for CheckContext {}

/// Connect with the service's consumer settings (so TLS/SASL properties apply) and check `needs`.
/// `Err` only when the brokers cannot be reached or refuse the client as a whole.
pub fn check_cluster(settings: &Settings, needs: &[TopicNeed], timeout: Duration) -> Result<ClusterCheck, Unreachable> {
    let mut cfg = consumer_config(settings);
    // A metadata request for a missing topic must never create it.
    cfg.set("allow.auto.create.topics", "false");
    let client: BaseConsumer<CheckContext> = cfg
        .create_with_context(CheckContext::default())
        .map_err(|e| Unreachable { error: format!("client configuration refused: {e}"), detail: None })?;
    let all = match client.fetch_metadata(None, timeout) {
        Ok(all) => all,
        Err(e) => {
            // Logs and errors wait on the client's queue (`log.queue`): serve them to learn why.
            for _ in 0..3 {
                let _ = client.poll(Duration::from_millis(50));
            }
            let detail = client.context().last_error.lock().expect("error lock").clone();
            return Err(Unreachable { error: e.to_string(), detail });
        }
    };
    let brokers = all.brokers().len();
    let mut topics = Vec::with_capacity(needs.len());
    for need in needs {
        let state = match client.fetch_metadata(Some(&need.name), timeout) {
            Ok(md) => match md.topics().iter().find(|t| t.name() == need.name) {
                Some(t) => {
                    let leaders: Vec<i32> = t.partitions().iter().map(|p| p.leader()).collect();
                    TopicState::from_metadata(t.error().map(RDKafkaErrorCode::from), &leaders)
                }
                None => TopicState::Missing,
            },
            Err(e) => match e.rdkafka_error_code() {
                Some(code) => TopicState::from_metadata(Some(code), &[]),
                None => TopicState::Error { code: e.to_string() },
            },
        };
        topics.push(TopicCheck {
            name: need.name.clone(),
            role: need.role,
            class: need.class.clone(),
            access: match need.access {
                TopicAccess::Read => "read",
                TopicAccess::Write => "write",
            },
            must_exist: need.must_exist,
            state,
        });
    }
    // The group's offsets on the topics it consumes (not on topics read by assignment).
    let sources: Vec<(&str, usize)> = needs
        .iter()
        .zip(&topics)
        .filter(|(n, _)| n.via_group)
        .filter_map(|(_, t)| match t.state {
            TopicState::Ok { partitions, .. } => Some((t.name.as_str(), partitions)),
            _ => None,
        })
        .collect();
    let group =
        needs.iter().any(|n| n.via_group).then(|| check_group(&client, &settings.kafka.group_id, &sources, timeout));
    Ok(ClusterCheck { bootstrap: settings.kafka.bootstrap_servers.clone(), brokers, topics, group })
}

fn check_group(client: &BaseConsumer<CheckContext>, id: &str, sources: &[(&str, usize)], timeout: Duration) -> GroupCheck {
    let id = id.to_string();
    // A refused group shows as a coordinator lookup error event, and the offset fetch times out.
    let fail = |e: KafkaError| {
        for _ in 0..3 {
            let _ = client.poll(Duration::from_millis(50));
        }
        let ctx = client.context();
        if e.rdkafka_error_code() == Some(RDKafkaErrorCode::GroupAuthorizationFailed)
            || ctx.saw(RDKafkaErrorCode::GroupAuthorizationFailed)
        {
            return GroupCheck::NotAuthorized { id: id.clone() };
        }
        let detail = ctx.last_error.lock().expect("error lock").clone();
        let code = match detail {
            Some(d) => format!("{e}; last client error: {d}"),
            None => e.to_string(),
        };
        GroupCheck::Error { id: id.clone(), code }
    };
    let mut tpl = TopicPartitionList::new();
    for (t, n) in sources {
        for p in 0..*n as i32 {
            tpl.add_partition(t, p);
        }
    }
    let committed = match client.committed_offsets(tpl, timeout) {
        Ok(c) => c,
        Err(e) => return fail(e),
    };
    let (mut with_offset, mut backlog) = (0usize, 0i64);
    for e in committed.elements() {
        if let Err(err) = e.error() {
            return fail(err);
        }
        let (low, high) = match watermarks(client, e.topic(), e.partition(), timeout) {
            Ok(w) => w,
            Err(err) => return fail(err),
        };
        match e.offset() {
            Offset::Offset(o) => {
                with_offset += 1;
                backlog += (high - o).max(0);
            }
            _ => backlog += high - low,
        }
    }
    let members = client
        .fetch_group_list(Some(&id), timeout)
        .ok()
        .and_then(|l| l.groups().iter().find(|g| g.name() == id).map(|g| g.members().len()))
        .unwrap_or(0);
    GroupCheck::Described { id, committed: with_offset, partitions: committed.count(), backlog, members }
}

/// A partition's low and high offsets, retried a few times on errors that clear by themselves
/// (a leader moving or just elected, as after a topic is created).
fn watermarks(client: &BaseConsumer<CheckContext>, topic: &str, partition: i32, timeout: Duration) -> Result<(i64, i64), KafkaError> {
    let mut attempt = 0;
    loop {
        match client.fetch_watermarks(topic, partition, timeout) {
            Err(e) if attempt < 5 && is_transient(&e) => {
                attempt += 1;
                std::thread::sleep(Duration::from_millis(200));
            }
            other => return other,
        }
    }
}

fn is_transient(e: &KafkaError) -> bool {
    matches!(
        e.rdkafka_error_code(),
        Some(
            RDKafkaErrorCode::NotLeaderForPartition
                | RDKafkaErrorCode::LeaderNotAvailable
                | RDKafkaErrorCode::UnknownLeaderEpoch
                | RDKafkaErrorCode::FencedLeaderEpoch
                | RDKafkaErrorCode::OffsetNotAvailable
        )
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(state: TopicState, role: &'static str, must_exist: bool) -> TopicCheck {
        TopicCheck {
            name: "t.x".into(),
            role,
            class: None,
            access: if role == "source" { "read" } else { "write" },
            must_exist,
            state,
        }
    }

    #[test]
    fn metadata_codes_map_to_states() {
        assert_eq!(TopicState::from_metadata(None, &[1, 1, -1]), TopicState::Ok { partitions: 3, leaderless: 1 });
        assert_eq!(TopicState::from_metadata(Some(RDKafkaErrorCode::UnknownTopicOrPartition), &[]), TopicState::Missing);
        assert_eq!(
            TopicState::from_metadata(Some(RDKafkaErrorCode::TopicAuthorizationFailed), &[]),
            TopicState::NotAuthorized
        );
        assert!(matches!(
            TopicState::from_metadata(Some(RDKafkaErrorCode::LeaderNotAvailable), &[]),
            TopicState::Error { .. }
        ));
    }

    #[test]
    fn problems_name_the_topic_and_the_fix() {
        assert_eq!(check(TopicState::Ok { partitions: 6, leaderless: 0 }, "source", true).problem(), None);
        let p = check(TopicState::Missing, "source", true).problem().unwrap();
        assert!(p.contains("t.x (source) does not exist"), "{p}");
        let p = check(TopicState::Missing, "review", true).problem().unwrap();
        assert!(p.contains("routing.create_missing_topics"), "{p}");
        assert_eq!(check(TopicState::Missing, "review", false).problem(), None, "the service creates it");
        let p = check(TopicState::NotAuthorized, "source", true).problem().unwrap();
        assert!(p.contains("Describe and Read") && p.contains("TOPIC_AUTHORIZATION_FAILED"), "{p}");
        let p = check(TopicState::NotAuthorized, "dead letters", true).problem().unwrap();
        assert!(p.contains("Describe and Write"), "{p}");
        let p = check(TopicState::Ok { partitions: 4, leaderless: 2 }, "review", true).problem().unwrap();
        assert!(p.contains("2 of 4 partitions have no leader"), "{p}");
    }
}
