//! Destination topics: which exist (from cluster metadata, refreshed at a bounded rate), and creating missing ones when settings allow.

use std::collections::HashSet;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use rdkafka::admin::{AdminClient, AdminOptions, NewTopic, TopicReplication};
use rdkafka::client::DefaultClientContext;
use rdkafka::error::RDKafkaErrorCode;
use rdkafka::producer::{Producer, ThreadedProducer};

use super::producer::SinkContext;

const METADATA_TIMEOUT: Duration = Duration::from_secs(10);

/// Create missing topics, or not.
#[derive(Debug, Clone)]
pub struct CreatePolicy {
    pub enabled: bool,
    pub partitions: i32,
    pub replication: i32,
}

/// The topics known to exist. Bounded by the cluster's topic count.
pub struct KnownTopics {
    producer: Arc<ThreadedProducer<SinkContext>>,
    admin: Option<AdminClient<DefaultClientContext>>,
    create: CreatePolicy,
    known: Mutex<HashSet<String>>,
    last_refresh: Mutex<Option<Instant>>,
    min_refresh: Duration,
}

impl KnownTopics {
    pub fn new(
        producer: Arc<ThreadedProducer<SinkContext>>,
        admin: Option<AdminClient<DefaultClientContext>>,
        create: CreatePolicy,
        min_refresh: Duration,
    ) -> KnownTopics {
        KnownTopics {
            producer,
            admin,
            create,
            known: Mutex::new(HashSet::new()),
            last_refresh: Mutex::new(None),
            min_refresh,
        }
    }

    /// Does `topic` exist (creating it if allowed)? A miss refreshes metadata at most once per `min_refresh`.
    pub async fn exists(&self, topic: &str) -> bool {
        if self.known.lock().expect("topics lock").contains(topic) {
            return true;
        }
        let due = {
            let mut last = self.last_refresh.lock().expect("topics lock");
            let due = last.map_or(true, |t| t.elapsed() >= self.min_refresh);
            if due {
                *last = Some(Instant::now());
            }
            due
        };
        if due {
            self.refresh().await;
            if self.known.lock().expect("topics lock").contains(topic) {
                return true;
            }
        }
        if self.create.enabled {
            return self.create(topic).await;
        }
        false
    }

    /// Reload the topic list from cluster metadata; failures keep the old list.
    pub async fn refresh(&self) {
        let producer = self.producer.clone();
        let fetched = tokio::task::spawn_blocking(move || {
            producer
                .client()
                .fetch_metadata(None, METADATA_TIMEOUT)
                .map(|m| m.topics().iter().filter(|t| t.error().is_none()).map(|t| t.name().to_string()).collect())
        })
        .await;
        match fetched {
            Ok(Ok(names)) => *self.known.lock().expect("topics lock") = names,
            Ok(Err(e)) => tracing::warn!("topic metadata refresh failed: {e}"),
            Err(e) => tracing::warn!("topic metadata refresh task failed: {e}"),
        }
    }

    async fn create(&self, topic: &str) -> bool {
        let Some(admin) = &self.admin else { return false };
        let new = NewTopic::new(topic, self.create.partitions, TopicReplication::Fixed(self.create.replication));
        let opts = AdminOptions::new().operation_timeout(Some(METADATA_TIMEOUT));
        match admin.create_topics([&new], &opts).await {
            Ok(results) => {
                for r in results {
                    match r {
                        Ok(_) | Err((_, RDKafkaErrorCode::TopicAlreadyExists)) => {}
                        Err((t, code)) => {
                            tracing::warn!("cannot create topic {t}: {code}");
                            return false;
                        }
                    }
                }
                tracing::info!("created destination topic {topic}");
                self.known.lock().expect("topics lock").insert(topic.to_string());
                true
            }
            Err(e) => {
                tracing::warn!("cannot create topic {topic}: {e}");
                false
            }
        }
    }

    /// Forget a topic (a delivery said it does not exist).
    pub fn forget(&self, topic: &str) {
        self.known.lock().expect("topics lock").remove(topic);
    }
}
