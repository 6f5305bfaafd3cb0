//! The streaming service against a real Kafka broker (`SIEVELINE_TEST_BROKERS`; missing is a failure).
//!
//! Index — what each test guards (reference: Kafka at-least-once delivery with
//! consumer-group offset commits, as librdkafka implements it):
//! 1. `nothing_lost_50k_records_over_4_partitions` — every input offset has exactly one output; duplicates counted (0 on a clean run).
//! 2. `bad_input_is_dead_lettered_with_reason_and_original_bytes` — each malformed kind and unknown destinations land in dead letters with the right headers and bytes; the service keeps going.
//! 3. `same_key_keeps_its_order_in_every_output_topic` — per-partition order and the input key survive routing.
//! 4. `sigterm_drains_exits_zero_and_restart_resumes` — clean shutdown within the drain limit, resume from committed offsets, zero loss, zero duplicates.
//! 5. `sigkill_three_times_loses_nothing_and_bounds_duplicates` — crash safety; duplicates within in-flight + one commit interval of acks per kill.
//! 6. `broker_outage_reconnects_and_loses_nothing` — own broker stopped ~10 s mid-stream, restarted; the stream completes.
//! 7. `scale_out_splits_partitions_and_survivor_takes_over` — two instances in one group, one killed.
//! 8. `admin_metrics_match_outputs_and_spare_replica_is_ready` — `/metrics` parsed by the exposition-format reference (Python prometheus_client), counters equal outputs; readiness with zero partitions; model info; classify.

use crate::common;

use std::collections::{BTreeMap, HashMap};
use std::time::{Duration, Instant};

use common::data::{self, train_model, CLASSES, MALFORMED};
use common::kafka::{input_positions, produce_all, tally, Collector, Feeder};
use common::process::Scenario;
use common::{brokers, http, sample, sample_sum, test_dir};

const READY: Duration = Duration::from_secs(60);

#[test]
fn nothing_lost_50k_records_over_4_partitions() {
    let brokers = brokers();
    let dir = test_dir("lost");
    let model = train_model(&dir);
    let sc = Scenario::new("lost", &brokers, &model, &dir, 4);
    let outs = sc.create_topics(CLASSES);
    // 1% malformed, the four kinds in turn.
    let inputs = data::stream(50_000, 500, Some(100), 1);
    assert_eq!(inputs.iter().filter(|i| i.malformed.is_some()).count(), 500);
    produce_all(&brokers, &sc.input, &inputs);
    let expected = input_positions(&brokers, &sc.input, 4);
    assert_eq!(expected.len(), 50_000);

    let mut svc = sc.start("a");
    svc.wait_ready(READY);
    let mut col = Collector::new(&brokers, &outs);
    let started = Instant::now();
    assert!(col.until_covered(&expected, Duration::from_secs(180)), "not every input got an output; log {}", svc.log.display());
    eprintln!("50k records through the service in {:.1}s", started.elapsed().as_secs_f64());
    col.poll_for(Duration::from_secs(1));
    svc.signal("TERM");
    let st = svc.wait_exit(Duration::from_secs(15)).expect("exit after SIGTERM");
    assert!(st.success(), "exit status {st}");
    let t = tally(&expected, &col.per_source());
    eprintln!("nothing-lost tally: {t:?}");
    assert_eq!(t.missing, 0, "{t:?}");
    assert_eq!(t.duplicates, 0, "a clean run writes each output once: {t:?}");
    assert_eq!(col.records.len(), 50_000);
    let dead = col.records.iter().filter(|r| r.topic == sc.dead_topic()).count();
    assert_eq!(dead, 500, "exactly the malformed records are dead-lettered");
}

#[test]
fn bad_input_is_dead_lettered_with_reason_and_original_bytes() {
    let brokers = brokers();
    let dir = test_dir("bad");
    let model = train_model(&dir);
    let sc = Scenario::new("bad", &brokers, &model, &dir, 2);
    // No topic for "shipping": those decisions have an unknown destination.
    let routed: Vec<&str> = CLASSES.iter().copied().filter(|c| *c != "shipping").collect();
    let outs = sc.create_topics(&routed);
    let inputs = data::stream(400, 20, Some(10), 2);
    produce_all(&brokers, &sc.input, &inputs);
    let expected = input_positions(&brokers, &sc.input, 2);

    let mut svc = sc.start("a");
    svc.wait_ready(READY);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(60)), "log {}", svc.log.display());

    // Where each input landed in the input topic, by its bytes (each is unique).
    let mut input_col = Collector::new(&brokers, &[(sc.input.clone(), 2)]);
    input_col.poll_for(Duration::from_secs(2));
    assert_eq!(input_col.records.len(), 400);
    let pos: HashMap<Vec<u8>, (i32, i64)> = input_col.records.iter().map(|r| (r.payload.clone(), (r.partition, r.offset))).collect();

    let dead: Vec<_> = col.records.iter().filter(|r| r.topic == sc.dead_topic()).collect();
    let mut by_kind: BTreeMap<&str, usize> = BTreeMap::new();
    for i in inputs.iter().filter(|i| i.malformed.is_some()) {
        let kind = i.malformed.unwrap();
        let reason = MALFORMED.iter().find(|(k, _)| *k == kind).unwrap().1;
        let hits: Vec<_> = dead.iter().filter(|r| r.payload == i.payload).collect();
        assert_eq!(hits.len(), 1, "{kind} record dead-lettered once");
        let d = hits[0];
        assert_eq!(d.header("sieveline.reason").as_deref(), Some(reason), "{kind}");
        assert_eq!(d.header("sieveline.source.topic").as_deref(), Some(sc.input.as_str()));
        assert_eq!(d.source(), pos[&i.payload], "source partition and offset headers");
        assert_eq!(d.key.as_deref(), Some(&i.key[..]), "key kept");
        *by_kind.entry(kind).or_default() += 1;
    }
    assert_eq!(by_kind.len(), 4, "every malformed kind was exercised: {by_kind:?}");
    let unknown: Vec<_> = dead.iter().filter(|r| r.header("sieveline.reason").as_deref() == Some("unknown destination")).collect();
    assert!(!unknown.is_empty(), "shipping decisions have no topic");
    for u in &unknown {
        let original = inputs.iter().find(|i| i.payload == u.payload).expect("unknown destination carries the original bytes");
        assert!(original.malformed.is_none());
        assert!(u.header("sieveline.error").unwrap().contains(&sc.class_topic("shipping")));
    }
    // Nothing else went to dead letters.
    assert_eq!(dead.len(), by_kind.values().sum::<usize>() + unknown.len());

    // The service keeps running and keeps routing.
    assert!(svc.child.try_wait().unwrap().is_none(), "service still running");
    assert_eq!(http(svc.port, "GET", "/healthz", None, b"").map(|r| r.0), Some(200));
    let more = data::stream(50, 5, None, 3);
    produce_all(&brokers, &sc.input, &more);
    let expected = input_positions(&brokers, &sc.input, 2);
    assert!(col.until_covered(&expected, Duration::from_secs(60)), "records after the bad ones are routed");
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(15)).expect("exits").success());
}

#[test]
fn same_key_keeps_its_order_in_every_output_topic() {
    let brokers = brokers();
    let dir = test_dir("order");
    let model = train_model(&dir);
    let sc = Scenario::new("order", &brokers, &model, &dir, 4);
    let outs = sc.create_topics(CLASSES);
    let inputs = data::stream(4000, 20, None, 4);
    produce_all(&brokers, &sc.input, &inputs);
    let expected = input_positions(&brokers, &sc.input, 4);
    let mut svc = sc.start("a");
    svc.wait_ready(READY);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(60)), "log {}", svc.log.display());
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(15)).expect("exits").success());

    let mut recs = col.records.clone();
    recs.sort_by(|a, b| (&a.topic, a.partition, a.offset).cmp(&(&b.topic, b.partition, b.offset)));
    let mut last: HashMap<(String, String), u64> = HashMap::new();
    let mut checked = 0;
    for r in &recs {
        let v: serde_json::Value = serde_json::from_slice(&r.payload).expect("decision JSON");
        let customer = v["record"]["customer"].as_str().unwrap().to_string();
        let seq = v["record"]["seq"].as_u64().unwrap();
        assert_eq!(r.key.as_deref(), Some(customer.as_bytes()), "input key kept");
        let prev = last.insert((r.topic.clone(), customer.clone()), seq);
        if let Some(p) = prev {
            assert!(seq > p, "{customer} in {}: seq {seq} after {p}", r.topic);
            checked += 1;
        }
    }
    assert!(checked > 3000, "order checked on {checked} pairs");
    let topics_used = recs.iter().map(|r| r.topic.as_str()).collect::<std::collections::BTreeSet<_>>();
    assert!(topics_used.len() >= 5, "routing spread over class and review topics: {topics_used:?}");
}

#[test]
fn sigterm_drains_exits_zero_and_restart_resumes() {
    let brokers = brokers();
    let dir = test_dir("sigterm");
    let model = train_model(&dir);
    let mut sc = Scenario::new("sigterm", &brokers, &model, &dir, 4);
    sc.drain_timeout_ms = 5000;
    let outs = sc.create_topics(CLASSES);
    let feeder = Feeder::start(&brokers, &sc.input, data::stream(20_000, 200, Some(100), 5), 4000);
    let mut a = sc.start("a");
    a.wait_ready(READY);
    a.wait_counter_at_least("sieveline_records_in_total", 4000.0, Duration::from_secs(60));
    let t0 = Instant::now();
    a.signal("TERM");
    let st = a.wait_exit(Duration::from_millis(sc.drain_timeout_ms + 5000)).expect("exit after SIGTERM");
    let took = t0.elapsed();
    assert!(st.success(), "exit status {st}; log {}", a.log.display());
    assert!(took <= Duration::from_millis(sc.drain_timeout_ms + 3000), "exit took {took:?}");
    let first_run = a.log_text();
    assert!(first_run.contains("draining"), "the service logged its drain");

    let mut b = sc.start("b");
    b.wait_ready(READY);
    feeder.finish();
    let expected = input_positions(&brokers, &sc.input, 4);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(120)), "log {}", b.log.display());
    col.poll_for(Duration::from_secs(1));
    b.signal("TERM");
    assert!(b.wait_exit(Duration::from_secs(15)).expect("exits").success());
    let t = tally(&expected, &col.per_source());
    eprintln!("sigterm tally over both runs: {t:?} (first run stopped after {took:?})");
    assert_eq!(t.missing, 0, "{t:?}");
    assert_eq!(t.duplicates, 0, "a drained shutdown commits everything it wrote: {t:?}");
}

#[test]
fn sigkill_three_times_loses_nothing_and_bounds_duplicates() {
    let brokers = brokers();
    let dir = test_dir("sigkill");
    let model = train_model(&dir);
    let sc = Scenario::new("sigkill", &brokers, &model, &dir, 4);
    let outs = sc.create_topics(CLASSES);
    let feeder = Feeder::start(&brokers, &sc.input, data::stream(30_000, 300, Some(100), 6), 1500);
    let seed = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_nanos() as u64;
    let mut rng = data::Rng::new(seed);
    eprintln!("sigkill moments seed {seed}");
    let mut svc = sc.start("run0");
    svc.wait_ready(READY);
    let mut kills_ms = Vec::new();
    for k in 1..=3 {
        let before = svc.counter("sieveline_records_in_total").unwrap_or(0.0);
        svc.wait_counter_at_least("sieveline_records_in_total", before + 500.0, Duration::from_secs(60));
        std::thread::sleep(Duration::from_millis(200 + rng.below(2500)));
        let seen = svc.counter("sieveline_records_in_total").unwrap_or(-1.0);
        kills_ms.push(now_ms());
        svc.kill9();
        eprintln!("SIGKILL {k} at about {seen} records in (this run)");
        svc = sc.start(&format!("run{k}"));
        svc.wait_ready(READY);
    }
    feeder.finish();
    let expected = input_positions(&brokers, &sc.input, 4);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(120)), "log {}", svc.log.display());
    col.poll_for(Duration::from_secs(1));
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(15)).expect("exits").success());

    let t = tally(&expected, &col.per_source());
    // Several class topics complete acks out of order.
    let per_topic = col.records.iter().fold(BTreeMap::<&str, usize>::new(), |mut m, r| {
        *m.entry(r.topic.as_str()).or_default() += 1;
        m
    });
    assert!(per_topic.len() >= 5, "{per_topic:?}");
    // Bound: per kill, what was in flight (limit × partitions) plus what was acknowledged
    // within one commit interval before the kill (output CreateTime, 250 ms slack).
    let in_flight_bound = sc.max_in_flight * sc.input_partitions as usize;
    let window = sc.commit_interval_ms as i64 + 250;
    let acked_in_window: usize = kills_ms
        .iter()
        .map(|&k| col.records.iter().filter(|r| r.timestamp_ms > k - window && r.timestamp_ms <= k).count())
        .sum();
    let bound = kills_ms.len() * in_flight_bound + acked_in_window;
    eprintln!("sigkill tally: {t:?}; duplicate bound {bound} (in-flight {in_flight_bound} x {} kills + {acked_in_window} acked within a commit interval)", kills_ms.len());
    assert_eq!(t.missing, 0, "{t:?}");
    assert!(t.duplicates <= bound, "{t:?} exceeds the bound {bound}");
}

#[test]
fn broker_outage_reconnects_and_loses_nothing() {
    let _ = brokers(); // the variable must be set even though this test brings its own broker
    let dir = test_dir("outage");
    let broker = OwnBroker::start(&dir.join("broker"));
    let model = train_model(&dir);
    let sc = Scenario::new("outage", &broker.bootstrap, &model, &dir, 4);
    let outs = sc.create_topics(CLASSES);
    let inputs = data::stream(20_000, 200, Some(100), 7);
    let n = inputs.len();
    produce_all(&broker.bootstrap, &sc.input, &inputs[..n / 2]);
    let mut svc = sc.start("a");
    svc.wait_ready(READY);
    let feeder = Feeder::start(&broker.bootstrap, &sc.input, inputs[n / 2..].to_vec(), 1000);
    svc.wait_counter_at_least("sieveline_records_in_total", 2000.0, Duration::from_secs(60));
    broker.stop();
    eprintln!("broker stopped at {:?} records in", svc.counter("sieveline_records_in_total"));
    std::thread::sleep(Duration::from_secs(10));
    broker.restart();
    feeder.finish();
    let expected = input_positions(&broker.bootstrap, &sc.input, 4);
    assert_eq!(expected.len(), n);
    let mut col = Collector::new(&broker.bootstrap, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(180)), "stream did not complete; log {}", svc.log.display());
    assert!(svc.child.try_wait().unwrap().is_none(), "the same process reconnected by itself");
    col.poll_for(Duration::from_secs(1));
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(20)).expect("exits").success());
    let t = tally(&expected, &col.per_source());
    eprintln!("outage tally: {t:?}");
    assert_eq!(t.missing, 0, "{t:?}");
}

#[test]
fn scale_out_splits_partitions_and_survivor_takes_over() {
    let brokers = brokers();
    let dir = test_dir("scale");
    let model = train_model(&dir);
    let sc = Scenario::new("scale", &brokers, &model, &dir, 4);
    let outs = sc.create_topics(CLASSES);
    let mut a = sc.start("a");
    a.wait_ready(READY);
    let mut b = sc.start("b");
    b.wait_ready(READY);
    common::wait_for(Duration::from_secs(60), "partitions split 2 + 2", || {
        let pa = a.counter("sieveline_partitions_assigned")?;
        let pb = b.counter("sieveline_partitions_assigned")?;
        (pa == 2.0 && pb == 2.0).then_some(())
    });
    let feeder = Feeder::start(&brokers, &sc.input, data::stream(16_000, 400, Some(100), 8), 2000);
    a.wait_counter_at_least("sieveline_records_in_total", 1000.0, Duration::from_secs(60));
    b.wait_counter_at_least("sieveline_records_in_total", 1000.0, Duration::from_secs(60));
    a.kill9();
    common::wait_for(Duration::from_secs(60), "survivor takes all 4 partitions", || {
        (b.counter("sieveline_partitions_assigned")? == 4.0).then_some(())
    });
    feeder.finish();
    let expected = input_positions(&brokers, &sc.input, 4);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(120)), "log {}", b.log.display());
    col.poll_for(Duration::from_secs(1));
    b.signal("TERM");
    assert!(b.wait_exit(Duration::from_secs(15)).expect("exits").success());
    let t = tally(&expected, &col.per_source());
    eprintln!("scale-out tally: {t:?}");
    assert_eq!(t.missing, 0, "{t:?}");
}

#[test]
fn admin_metrics_match_outputs_and_spare_replica_is_ready() {
    let brokers = brokers();
    let dir = test_dir("admin");
    let model = train_model(&dir);
    // One input partition and two replicas: one of them gets no partition.
    let sc = Scenario::new("admin", &brokers, &model, &dir, 1);
    let outs = sc.create_topics(CLASSES);
    let mut a = sc.start("a");
    a.wait_ready(READY);
    let mut b = sc.start("b");
    b.wait_ready(READY);
    common::wait_for(Duration::from_secs(60), "one partition between two replicas", || {
        let pa = a.counter("sieveline_partitions_assigned")?;
        let pb = b.counter("sieveline_partitions_assigned")?;
        (pa + pb == 1.0).then_some(())
    });
    for s in [&a, &b] {
        assert_eq!(http(s.port, "GET", "/readyz", None, b"").map(|r| r.0), Some(200), "ready with zero or one partition");
        assert_eq!(http(s.port, "GET", "/healthz", None, b"").map(|r| r.0), Some(200));
    }
    let inputs = data::stream(300, 10, Some(30), 9);
    produce_all(&brokers, &sc.input, &inputs);
    let expected = input_positions(&brokers, &sc.input, 1);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(60)));
    col.poll_for(Duration::from_millis(500));
    let owner = if a.counter("sieveline_partitions_assigned") == Some(1.0) { &a } else { &b };
    // Counters are updated on the ack, which can trail the output by a moment.
    common::wait_for(Duration::from_secs(10), "in-flight back to zero", || (owner.counter("sieveline_records_in_flight")? == 0.0).then_some(()));

    // Exposition format reference: Python prometheus_client's text parser.
    let m = owner.metrics().expect("metrics");
    let in_total = sample(&m, "sieveline_records_in_total", &[]);
    assert_eq!(in_total, 300.0);
    let count = |topic: &str| col.records.iter().filter(|r| r.topic == topic).count() as f64;
    let routed: f64 = CLASSES.iter().map(|c| count(&sc.class_topic(c))).sum();
    assert_eq!(sample(&m, "sieveline_records_out_total", &[]), routed);
    assert_eq!(sample(&m, "sieveline_records_reviewed_total", &[]), count(&sc.review_topic()));
    assert!(count(&sc.review_topic()) > 0.0, "mixed tickets go to review");
    for (kind, reason) in MALFORMED {
        let produced = inputs.iter().filter(|i| i.malformed == Some(*kind)).count() as f64;
        assert!(produced > 0.0);
        assert_eq!(sample(&m, "sieveline_records_dead_lettered_total", &[("reason", reason)]), produced, "{reason}");
    }
    assert_eq!(sample_sum(&m, "sieveline_records_dead_lettered_total"), count(&sc.dead_topic()));
    for c in CLASSES {
        let by_header = col
            .records
            .iter()
            .filter(|r| r.topic != sc.dead_topic() && r.header("sieveline.class").as_deref() == Some(*c))
            .count() as f64;
        assert_eq!(sample(&m, "sieveline_decisions_total", &[("class", c)]), by_header, "decisions of {c}");
    }
    assert_eq!(sample(&m, "sieveline_scoring_latency_seconds_count", &[]), 300.0);
    assert_eq!(sample(&m, "sieveline_end_to_end_latency_seconds_count", &[]), 300.0);
    assert_eq!(sample(&m, "sieveline_records_in_flight", &[]), 0.0);
    assert_eq!(sample(&m, "sieveline_in_flight_limit_per_partition_records", &[]), sc.max_in_flight as f64);
    let spare = if std::ptr::eq(owner, &a) { &b } else { &a };
    let ms = spare.metrics().expect("spare metrics");
    assert_eq!(sample(&ms, "sieveline_records_in_total", &[]), 0.0);

    // Model info and ad-hoc classification (loopback bind: no token needed).
    let (st, body) = http(owner.port, "GET", "/model", None, b"").unwrap();
    assert_eq!(st, 200);
    let info: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(info["classes"], serde_json::json!(CLASSES));
    let (st, body) = http(owner.port, "POST", "/classify", None, br#"{"subject":"charged twice for my order","body":"invoice total is wrong"}"#).unwrap();
    assert_eq!(st, 200, "{body}");
    let d: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(d["class"], "billing");
    assert_eq!(d["destination"], sc.class_topic("billing"));
    let (st, _) = http(owner.port, "POST", "/classify", None, b"{not json").unwrap();
    assert_eq!(st, 422);
    for s in [&mut a, &mut b] {
        s.signal("TERM");
        assert!(s.wait_exit(Duration::from_secs(15)).expect("exits").success());
    }
}

fn now_ms() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_millis() as i64
}

/// A broker of this test's own, stopped on drop (even when the test fails).
struct OwnBroker {
    dir: std::path::PathBuf,
    bootstrap: String,
}

impl OwnBroker {
    fn script() -> std::path::PathBuf {
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/test-broker/broker.sh")
    }

    fn start(dir: &std::path::Path) -> OwnBroker {
        std::fs::create_dir_all(dir).unwrap();
        let out = std::process::Command::new("bash").arg(Self::script()).arg("start").arg(dir).output().unwrap();
        assert!(out.status.success(), "broker start failed: {}", String::from_utf8_lossy(&out.stderr));
        let bootstrap = String::from_utf8_lossy(&out.stdout).lines().last().unwrap_or_default().trim().to_string();
        assert!(bootstrap.starts_with("127.0.0.1:"), "bootstrap {bootstrap:?}");
        OwnBroker { dir: dir.to_path_buf(), bootstrap }
    }

    fn stop(&self) {
        let st = std::process::Command::new("bash").arg(Self::script()).arg("stop").arg(&self.dir).status().unwrap();
        assert!(st.success(), "broker stop failed");
    }

    fn restart(&self) {
        let out = std::process::Command::new("bash").arg(Self::script()).arg("restart").arg(&self.dir).output().unwrap();
        assert!(out.status.success(), "broker restart failed: {}", String::from_utf8_lossy(&out.stderr));
        let b = String::from_utf8_lossy(&out.stdout).lines().last().unwrap_or_default().trim().to_string();
        assert_eq!(b, self.bootstrap, "restart keeps the ports");
    }
}

impl Drop for OwnBroker {
    fn drop(&mut self) {
        let _ = std::process::Command::new("bash").arg(Self::script()).arg("stop").arg(&self.dir).status();
    }
}
