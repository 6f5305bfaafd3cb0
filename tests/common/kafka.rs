//! Kafka helpers for tests: create topics, produce inputs (all at once or at a steady rate), and collect every output with its headers.

use std::collections::{BTreeMap, HashMap};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use rdkafka::admin::{AdminClient, AdminOptions, NewTopic, TopicReplication};
use rdkafka::client::DefaultClientContext;
use rdkafka::consumer::{BaseConsumer, Consumer};
use rdkafka::message::{Headers, Message};
use rdkafka::producer::{BaseRecord, DefaultProducerContext, Producer, ThreadedProducer};
use rdkafka::{ClientConfig, Offset, TopicPartitionList};

use super::data::Input;

pub fn create_topics(brokers: &str, topics: &[(&str, i32)]) {
    let admin: AdminClient<DefaultClientContext> =
        ClientConfig::new().set("bootstrap.servers", brokers).create().expect("admin client");
    let new: Vec<NewTopic> = topics.iter().map(|(t, p)| NewTopic::new(t, *p, TopicReplication::Fixed(1))).collect();
    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build().unwrap();
    let res = rt
        .block_on(admin.create_topics(new.iter(), &AdminOptions::new().operation_timeout(Some(Duration::from_secs(20)))))
        .expect("create topics");
    for r in res {
        if let Err((t, e)) = r {
            panic!("cannot create topic {t}: {e}");
        }
    }
    // Wait until metadata shows every partition with a leader.
    let p: ThreadedProducer<DefaultProducerContext> = producer(brokers);
    super::wait_for(Duration::from_secs(20), "topic metadata", || {
        let md = p.client().fetch_metadata(None, Duration::from_secs(5)).ok()?;
        let ok = topics.iter().all(|(t, n)| {
            md.topics().iter().any(|mt| mt.name() == *t && mt.error().is_none() && mt.partitions().len() == *n as usize && mt.partitions().iter().all(|p| p.leader() >= 0))
        });
        ok.then_some(())
    });
}

pub fn producer(brokers: &str) -> ThreadedProducer<DefaultProducerContext> {
    ClientConfig::new()
        .set("bootstrap.servers", brokers)
        .set("enable.idempotence", "true")
        .set("linger.ms", "5")
        .create()
        .expect("producer")
}

/// Produce every input to `topic` (partitioned by key) and wait for all acks.
pub fn produce_all(brokers: &str, topic: &str, inputs: &[Input]) {
    let p = producer(brokers);
    for i in inputs {
        send_one(&p, topic, i);
    }
    p.flush(Duration::from_secs(60)).expect("flush inputs");
}

fn send_one(p: &ThreadedProducer<DefaultProducerContext>, topic: &str, i: &Input) {
    let mut rec = BaseRecord::to(topic).key(&i.key[..]).payload(&i.payload[..]);
    loop {
        match p.send(rec) {
            Ok(()) => return,
            Err((_, back)) => {
                rec = back;
                std::thread::sleep(Duration::from_millis(2));
            }
        }
    }
}

/// Produce `(partition, key, payload)` records to `topic` (the partition chosen by the key
/// when `None`) and wait for all acks.
pub fn produce_records(brokers: &str, topic: &str, records: &[(Option<i32>, Option<Vec<u8>>, Vec<u8>)]) {
    let p = producer(brokers);
    for (part, key, payload) in records {
        let mut rec = BaseRecord::to(topic).payload(&payload[..]);
        if let Some(k) = key {
            rec = rec.key(&k[..]);
        }
        if let Some(n) = part {
            rec = rec.partition(*n);
        }
        loop {
            match p.send(rec) {
                Ok(()) => break,
                Err((_, back)) => {
                    rec = back;
                    std::thread::sleep(Duration::from_millis(2));
                }
            }
        }
    }
    p.flush(Duration::from_secs(60)).expect("flush records");
}

/// The sum of the high watermarks of `topic`'s partitions: how many records it holds.
pub fn topic_size(brokers: &str, topic: &str, partitions: i32) -> i64 {
    let c: BaseConsumer = ClientConfig::new().set("bootstrap.servers", brokers).create().unwrap();
    (0..partitions).map(|p| c.fetch_watermarks(topic, p, Duration::from_secs(10)).expect("watermarks").1).sum()
}

/// Produces inputs at a steady rate on a thread.
pub struct Feeder {
    pub sent: Arc<AtomicUsize>,
    done: Arc<AtomicBool>,
    handle: Option<std::thread::JoinHandle<()>>,
}

impl Feeder {
    pub fn start(brokers: &str, topic: &str, inputs: Vec<Input>, per_sec: usize) -> Feeder {
        let sent = Arc::new(AtomicUsize::new(0));
        let done = Arc::new(AtomicBool::new(false));
        let (b, t, s, d) = (brokers.to_string(), topic.to_string(), sent.clone(), done.clone());
        let handle = std::thread::spawn(move || {
            let p = producer(&b);
            let start = Instant::now();
            for (n, i) in inputs.iter().enumerate() {
                let due = start + Duration::from_secs_f64(n as f64 / per_sec as f64);
                if let Some(w) = due.checked_duration_since(Instant::now()) {
                    std::thread::sleep(w);
                }
                send_one(&p, &t, i);
                s.store(n + 1, Ordering::SeqCst);
            }
            p.flush(Duration::from_secs(120)).expect("flush feeder");
            d.store(true, Ordering::SeqCst);
        });
        Feeder { sent, done, handle: Some(handle) }
    }

    pub fn finish(mut self) {
        self.handle.take().unwrap().join().expect("feeder thread");
        assert!(self.done.load(Ordering::SeqCst));
    }
}

/// One record read back from an output topic.
#[derive(Debug, Clone)]
pub struct OutRec {
    pub topic: String,
    pub partition: i32,
    pub offset: i64,
    pub key: Option<Vec<u8>>,
    pub payload: Vec<u8>,
    pub headers: BTreeMap<String, Vec<u8>>,
    pub timestamp_ms: i64,
}

impl OutRec {
    pub fn header(&self, name: &str) -> Option<String> {
        self.headers.get(name).map(|v| String::from_utf8_lossy(v).into_owned())
    }
    /// (source partition, source offset) from the service's headers.
    pub fn source(&self) -> (i32, i64) {
        let p = self.header("sieveline.source.partition").expect("source partition header").parse().unwrap();
        let o = self.header("sieveline.source.offset").expect("source offset header").parse().unwrap();
        (p, o)
    }
}

/// Reads output topics from the beginning, without a consumer group.
pub struct Collector {
    consumer: BaseConsumer,
    pub records: Vec<OutRec>,
}

impl Collector {
    pub fn new(brokers: &str, topics: &[(String, i32)]) -> Collector {
        let consumer: BaseConsumer = ClientConfig::new()
            .set("bootstrap.servers", brokers)
            .set("group.id", format!("collector-{}", super::unique_suffix()))
            .set("enable.auto.commit", "false")
            .create()
            .expect("collector");
        let mut tpl = TopicPartitionList::new();
        for (t, n) in topics {
            for p in 0..*n {
                tpl.add_partition_offset(t, p, Offset::Beginning).unwrap();
            }
        }
        consumer.assign(&tpl).expect("assign");
        Collector { consumer, records: Vec::new() }
    }

    /// Read for up to `d`.
    pub fn poll_for(&mut self, d: Duration) {
        let deadline = Instant::now() + d;
        while Instant::now() < deadline {
            match self.consumer.poll(Duration::from_millis(50)) {
                Some(Ok(m)) => {
                    let mut headers = BTreeMap::new();
                    if let Some(hs) = m.headers() {
                        for h in hs.iter() {
                            headers.insert(h.key.to_string(), h.value.unwrap_or_default().to_vec());
                        }
                    }
                    self.records.push(OutRec {
                        topic: m.topic().to_string(),
                        partition: m.partition(),
                        offset: m.offset(),
                        key: m.key().map(<[u8]>::to_vec),
                        payload: m.payload().unwrap_or_default().to_vec(),
                        headers,
                        timestamp_ms: m.timestamp().to_millis().unwrap_or(0),
                    });
                }
                Some(Err(e)) => eprintln!("collector: {e}"),
                None => {}
            }
        }
    }

    /// Outputs per input position.
    pub fn per_source(&self) -> HashMap<(i32, i64), usize> {
        let mut m = HashMap::new();
        for r in &self.records {
            *m.entry(r.source()).or_insert(0) += 1;
        }
        m
    }

    /// Read until every input position in `expected` has an output (or `limit` passes).
    pub fn until_covered(&mut self, expected: &[(i32, i64)], limit: Duration) -> bool {
        let deadline = Instant::now() + limit;
        loop {
            let seen = self.per_source();
            if expected.iter().all(|k| seen.contains_key(k)) {
                return true;
            }
            if Instant::now() >= deadline {
                return false;
            }
            self.poll_for(Duration::from_millis(500));
        }
    }
}

/// Every (partition, offset) of `topic`: from offset 0 to each partition's high watermark.
pub fn input_positions(brokers: &str, topic: &str, partitions: i32) -> Vec<(i32, i64)> {
    let c: BaseConsumer = ClientConfig::new().set("bootstrap.servers", brokers).create().unwrap();
    let mut out = Vec::new();
    for p in 0..partitions {
        let (lo, hi) = c.fetch_watermarks(topic, p, Duration::from_secs(10)).expect("watermarks");
        for o in lo..hi {
            out.push((p, o));
        }
    }
    out
}

/// Counts of a delivery run: inputs with no output, and extra outputs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Tally {
    pub inputs: usize,
    pub missing: usize,
    pub duplicates: usize,
}

pub fn tally(expected: &[(i32, i64)], per_source: &HashMap<(i32, i64), usize>) -> Tally {
    let missing = expected.iter().filter(|k| !per_source.contains_key(k)).count();
    let duplicates = per_source.values().map(|n| n - 1).sum();
    Tally { inputs: expected.len(), missing, duplicates }
}
