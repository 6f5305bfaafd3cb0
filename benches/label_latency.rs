//! Label-to-effect latency through a real broker: from a label event acknowledged by the broker (the label producer's delivery report) to the first decision scored with a model view that includes it (the decision message's CreateTime, set when the service produces it), p50 and p99, while records stream.
//!
//! Run: `cargo bench --bench label_latency` (a 30 s stream). It uses the broker named by
//! `SIEVELINE_TEST_BROKERS`, or starts the test broker (`scripts/test-broker/broker.sh`) for
//! the run. Under `cargo test --benches` it runs a 5 s smoke version.
//!
//! The service is the release binary (`sieveline run`) with learning on, started on a base
//! model trained from 100 labels of the invented demo scenario. Records (demo tickets,
//! keyed by id, 4 partitions) flow at 2,000/s. Complete label events go to a one-partition
//! learned-label topic at 200/s, so the k-th label is included exactly by the views whose
//! version ends in `+k` or more. For label k the effect time is the earliest CreateTime of a
//! decision whose version counts at least k labels. Both clocks are this machine's; the
//! decision timestamps have millisecond resolution.

use std::collections::HashMap;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use rdkafka::admin::{AdminClient, AdminOptions, NewTopic, TopicReplication};
use rdkafka::client::{ClientContext, DefaultClientContext};
use rdkafka::config::ClientConfig;
use rdkafka::consumer::{BaseConsumer, Consumer};
use rdkafka::message::Message;
use rdkafka::producer::{BaseRecord, DefaultProducerContext, DeliveryResult, Producer, ProducerContext, ThreadedProducer};
use rdkafka::{Offset, TopicPartitionList};

const BIN: &str = env!("CARGO_BIN_EXE_sieveline");
const REPO: &str = env!("CARGO_MANIFEST_DIR");
const CLASSES: [&str; 8] =
    ["returns", "shipping", "billing", "account_access", "product_defect", "warranty", "order_changes", "product_questions"];
const RECORDS_PER_SEC: u64 = 2_000;
const LABELS_PER_SEC: u64 = 200;

fn now_us() -> i64 {
    SystemTime::now().duration_since(UNIX_EPOCH).unwrap().as_micros() as i64
}

/// Delivery reports of the label producer: (offset, wall time in µs when the broker's ack arrived).
struct AckTimes(Arc<Mutex<Vec<(i64, i64)>>>);

impl ClientContext for AckTimes {}

impl ProducerContext for AckTimes {
    type DeliveryOpaque = ();
    fn delivery(&self, result: &DeliveryResult<'_>, _: ()) {
        let at = now_us();
        if let Ok(m) = result {
            self.0.lock().unwrap().push((m.offset(), at));
        }
    }
}

/// The test broker started for this run, stopped on drop.
struct OwnBroker(PathBuf);

impl Drop for OwnBroker {
    fn drop(&mut self) {
        let _ = Command::new("bash").arg(format!("{REPO}/scripts/test-broker/broker.sh")).arg("stop").arg(&self.0).status();
    }
}

struct Service(Child);

impl Drop for Service {
    fn drop(&mut self) {
        let _ = Command::new("kill").arg("-TERM").arg(self.0.id().to_string()).status();
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(20) {
            if let Ok(Some(_)) = self.0.try_wait() {
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        let _ = self.0.kill();
    }
}

fn run(cmd: &mut Command) -> String {
    let out = cmd.output().expect("run a command");
    assert!(out.status.success(), "{cmd:?} failed: {}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn http_get(port: u16, path: &str) -> Option<(u16, String)> {
    let mut s = std::net::TcpStream::connect(("127.0.0.1", port)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(5))).ok()?;
    write!(s, "GET {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n\r\n").ok()?;
    let mut text = String::new();
    s.read_to_string(&mut text).ok()?;
    let status = text.split_whitespace().nth(1)?.parse().ok()?;
    Some((status, text.split_once("\r\n\r\n").map(|x| x.1.to_string()).unwrap_or_default()))
}

fn create_topics(brokers: &str, topics: &[(String, i32)]) {
    let admin: AdminClient<DefaultClientContext> = ClientConfig::new().set("bootstrap.servers", brokers).create().unwrap();
    let new: Vec<NewTopic> = topics.iter().map(|(t, p)| NewTopic::new(t, *p, TopicReplication::Fixed(1))).collect();
    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build().unwrap();
    for r in rt.block_on(admin.create_topics(new.iter(), &AdminOptions::new().operation_timeout(Some(Duration::from_secs(20))))).unwrap() {
        r.unwrap_or_else(|(t, e)| panic!("cannot create topic {t}: {e}"));
    }
    let c: BaseConsumer = ClientConfig::new().set("bootstrap.servers", brokers).create().unwrap();
    let t0 = Instant::now();
    loop {
        let md = c.fetch_metadata(None, Duration::from_secs(5)).unwrap();
        let ready = topics.iter().all(|(t, n)| {
            md.topics().iter().any(|m| m.name() == t && m.error().is_none() && m.partitions().len() == *n as usize && m.partitions().iter().all(|p| p.leader() >= 0))
        });
        if ready {
            return;
        }
        assert!(t0.elapsed() < Duration::from_secs(30), "topics not ready");
        std::thread::sleep(Duration::from_millis(100));
    }
}

fn id_of(line: &str) -> String {
    serde_json::from_str::<serde_json::Value>(line).unwrap()["id"].as_str().unwrap_or_default().to_string()
}

/// Produce `lines` to `topic` keyed by id, at `per_sec`, until `until` (cycling through them).
fn pace<C: ProducerContext + 'static>(p: &ThreadedProducer<C>, topic: &str, lines: &[String], per_sec: u64, until: Instant, ctx: C::DeliveryOpaque)
where
    C::DeliveryOpaque: Clone,
{
    let start = Instant::now();
    let mut sent = 0u64;
    while Instant::now() < until && !lines.is_empty() {
        let due = start + Duration::from_micros(sent * 1_000_000 / per_sec);
        if let Some(wait) = due.checked_duration_since(Instant::now()) {
            std::thread::sleep(wait);
        }
        let line = &lines[(sent as usize) % lines.len()];
        let key = id_of(line);
        let mut rec = BaseRecord::with_opaque_to(topic, ctx.clone()).key(&key).payload(line);
        loop {
            match p.send(rec) {
                Ok(()) => break,
                Err((_, r)) => {
                    rec = r;
                    std::thread::sleep(Duration::from_millis(1));
                }
            }
        }
        sent += 1;
    }
    p.flush(Duration::from_secs(30)).unwrap();
}

fn percentile(sorted: &[f64], q: f64) -> f64 {
    sorted[((sorted.len() - 1) as f64 * q).round() as usize]
}

fn main() {
    let full = std::env::args().any(|a| a == "--bench");
    let seconds = if full { 30 } else { 5 };
    let work = Path::new(REPO).join("target/bench-label-latency");
    let _ = std::fs::remove_dir_all(&work);
    std::fs::create_dir_all(&work).unwrap();

    let (brokers, _own) = match std::env::var("SIEVELINE_TEST_BROKERS") {
        Ok(b) if !b.trim().is_empty() => (b, None),
        _ => {
            let dir = work.join("broker");
            std::fs::create_dir_all(&dir).unwrap();
            let out = run(Command::new("bash").arg(format!("{REPO}/scripts/test-broker/broker.sh")).arg("start").arg(&dir));
            (out.lines().last().unwrap().trim().to_string(), Some(OwnBroker(dir)))
        }
    };

    // The invented demo scenario; a base model from its first 100 labels.
    let stream = work.join("stream");
    run(Command::new(BIN).args(["generate", "--kind", "tickets", "--records", "20000", "--out"]).arg(&stream));
    let records: Vec<String> = std::fs::read_to_string(stream.join("tickets.jsonl")).unwrap().lines().map(str::to_string).collect();
    let labels: Vec<String> = std::fs::read_to_string(stream.join("tickets.labels.jsonl")).unwrap().lines().map(str::to_string).collect();
    std::fs::write(work.join("first.jsonl"), labels[..100].join("\n") + "\n").unwrap();
    let config = format!("{REPO}/demo-stream/config-tickets.toml");
    run(Command::new(BIN).arg("--config").arg(&config).arg("train").arg("--labels").arg(work.join("first.jsonl")).arg("--out").arg(work.join("base.svm")));

    let tag = format!("lat{}", now_us() % 1_000_000_000);
    let input = format!("{tag}.in");
    let label_topic = format!("{tag}.labels");
    let mut outs: Vec<(String, i32)> = CLASSES.iter().map(|c| (format!("{tag}.routed.{c}"), 1)).collect();
    outs.push((format!("{tag}.review"), 1));
    let mut all = outs.clone();
    all.extend([(input.clone(), 4), (label_topic.clone(), 1), (format!("{tag}.dead"), 1)]);
    create_topics(&brokers, &all);

    let port = std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port();
    let settings = work.join("settings.toml");
    std::fs::write(
        &settings,
        format!(
            r#"[input]
id_field = "id"
[[input.fields]]
name = "subject"
weight = 2.0
[[input.fields]]
name = "body"
weight = 1.0
[service]
model = "{model}"
[source]
kind = "kafka"
topics = ["{input}"]
[sink]
kind = "kafka"
[kafka]
bootstrap_servers = "{brokers}"
group_id = "{tag}-group"
[routing]
topic_template = "{tag}.routed.{{class}}"
review_topic = "{tag}.review"
[dead_letter]
topic = "{tag}.dead"
[learning]
enabled = true
label_topic = "{label_topic}"
unknown_classes = "add"
[admin]
bind = "127.0.0.1:{port}"
"#,
            model = work.join("base.svm").display(),
        ),
    )
    .unwrap();
    let log = std::fs::File::create(work.join("service.log")).unwrap();
    let svc = Service(
        Command::new(BIN)
            .arg("--config")
            .arg(&settings)
            .arg("run")
            .stdin(Stdio::null())
            .stdout(log.try_clone().unwrap())
            .stderr(log)
            .spawn()
            .unwrap(),
    );
    let t0 = Instant::now();
    while !matches!(http_get(port, "/readyz"), Some((200, _))) {
        assert!(t0.elapsed() < Duration::from_secs(60), "the service did not become ready; see {}", work.join("service.log").display());
        std::thread::sleep(Duration::from_millis(100));
    }

    // Records for `seconds`; labels from one second in until two seconds before the end, so
    // every label has records scored after it.
    let start = Instant::now();
    let end = start + Duration::from_secs(seconds);
    let rec_producer: ThreadedProducer<DefaultProducerContext> =
        ClientConfig::new().set("bootstrap.servers", &brokers).set("linger.ms", "1").create().unwrap();
    let acks = Arc::new(Mutex::new(Vec::new()));
    let lab_producer: ThreadedProducer<AckTimes> =
        ClientConfig::new().set("bootstrap.servers", &brokers).set("linger.ms", "0").create_with_context(AckTimes(acks.clone())).unwrap();
    let feeder = {
        let input = input.clone();
        std::thread::spawn(move || pace(&rec_producer, &input, &records, RECORDS_PER_SEC, end, ()))
    };
    std::thread::sleep(Duration::from_secs(1));
    pace(&lab_producer, &label_topic, &labels[100..], LABELS_PER_SEC, end - Duration::from_secs(2), ());
    feeder.join().unwrap();

    // Every decision: (labels its view counts, CreateTime in ms).
    let consumer: BaseConsumer =
        ClientConfig::new().set("bootstrap.servers", &brokers).set("group.id", format!("{tag}-reader")).set("enable.auto.commit", "false").create().unwrap();
    let mut tpl = TopicPartitionList::new();
    for (t, _) in &outs {
        tpl.add_partition_offset(t, 0, Offset::Beginning).unwrap();
    }
    consumer.assign(&tpl).unwrap();
    let mut decisions: Vec<(u64, i64)> = Vec::new();
    let mut quiet_since = Instant::now();
    while quiet_since.elapsed() < Duration::from_secs(3) {
        match consumer.poll(Duration::from_millis(100)) {
            Some(Ok(m)) => {
                quiet_since = Instant::now();
                let v: serde_json::Value = serde_json::from_slice(m.payload().unwrap_or_default()).unwrap();
                let version = v["model_version"].as_str().unwrap_or_default();
                let n: u64 = version.rsplit_once('+').and_then(|(_, n)| n.parse().ok()).unwrap_or(0);
                decisions.push((n, m.timestamp().to_millis().unwrap()));
            }
            Some(Err(e)) => panic!("reading decisions: {e}"),
            None => {}
        }
    }
    drop(svc);

    // Earliest decision time among views counting at least k labels, for every k.
    decisions.sort_unstable_by(|a, b| b.0.cmp(&a.0));
    let max_n = decisions.first().map_or(0, |d| d.0) as usize;
    let mut first_with = vec![i64::MAX; max_n + 2];
    let mut best = i64::MAX;
    let mut i = 0;
    for k in (1..=max_n).rev() {
        while i < decisions.len() && decisions[i].0 as usize >= k {
            best = best.min(decisions[i].1);
            i += 1;
        }
        first_with[k] = best;
    }
    let acks: HashMap<i64, i64> = acks.lock().unwrap().iter().copied().collect();
    let mut lat_ms: Vec<f64> = Vec::new();
    let mut unseen = 0;
    for (&offset, &acked_us) in &acks {
        let k = offset as usize + 1; // the label at offset o is the (o+1)-th in the one-partition log
        match first_with.get(k).copied().filter(|&t| t != i64::MAX) {
            Some(t) => lat_ms.push((t * 1000 - acked_us) as f64 / 1000.0),
            None => unseen += 1,
        }
    }
    assert!(!lat_ms.is_empty(), "no label took effect; see {}", work.join("service.log").display());
    lat_ms.sort_by(|a, b| a.partial_cmp(b).unwrap());
    println!(
        "label-to-effect through the broker ({} records/s, {} labels/s, {} s, publish interval 200 ms): {} labels, p50 {:.1} ms, p99 {:.1} ms, max {:.1} ms; {} decisions read; {} labels with no later decision",
        RECORDS_PER_SEC,
        LABELS_PER_SEC,
        seconds,
        lat_ms.len(),
        percentile(&lat_ms, 0.5),
        percentile(&lat_ms, 0.99),
        lat_ms[lat_ms.len() - 1],
        decisions.len(),
        unseen
    );
}
