//! The demo scenario on a real broker: `demo-stream/run-on-kafka.sh` as a user runs it (its own test broker from Maven Central, topics, check-config, `sieveline run` with learning, tickets and id-only labels fed by `sieveline feed`), then every ticket checked from the output topics, independently of what the script prints.
//!
//! Index — what each test guards:
//! 1. `kafka_variant_decides_every_ticket_exactly_once_and_learns` — every input position has
//!    exactly one decision on the routed or review topics (Kafka's at-least-once delivery with
//!    no failure gives exactly one), the decided ids are exactly the generated ticket ids, and
//!    the reviewers' id-only labels were resolved and learned (the served version counts them).

use crate::common;

use std::collections::{BTreeSet, HashMap};
use std::process::Command;
use std::time::Duration;

use common::kafka::{input_positions, tally, Collector};
use common::{http, test_dir};

const CLASSES: [&str; 8] =
    ["returns", "shipping", "billing", "account_access", "product_defect", "warranty", "order_changes", "product_questions"];

/// Stops what the script left running, also when an assertion fails.
struct LeftRunning {
    service_pid: u32,
    broker_dir: String,
}

impl Drop for LeftRunning {
    fn drop(&mut self) {
        let _ = Command::new("kill").arg("-TERM").arg(self.service_pid.to_string()).status();
        std::thread::sleep(Duration::from_secs(1));
        let _ = Command::new("kill").arg("-KILL").arg(self.service_pid.to_string()).status();
        let broker = concat!(env!("CARGO_MANIFEST_DIR"), "/scripts/test-broker/broker.sh");
        let _ = Command::new("bash").args([broker, "stop", &self.broker_dir]).status();
    }
}

#[test]
fn kafka_variant_decides_every_ticket_exactly_once_and_learns() {
    let repo = env!("CARGO_MANIFEST_DIR");
    let dir = test_dir("demo-kafka");
    let records = 1200;
    let out = Command::new("bash")
        .arg(format!("{repo}/demo-stream/run-on-kafka.sh"))
        .arg(&dir)
        .env("RECORDS", records.to_string())
        .env("RATE", "1500")
        .env("KEEP", "1")
        .env("SIEVELINE_BIN", env!("CARGO_BIN_EXE_sieveline"))
        .output()
        .expect("run demo-stream/run-on-kafka.sh");
    let left: serde_json::Value = std::fs::read(dir.join("left-running.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or_else(|| panic!("the script left nothing running:\n{}", String::from_utf8_lossy(&out.stderr)));
    let _guard = LeftRunning {
        service_pid: left["service_pid"].as_u64().unwrap() as u32,
        broker_dir: left["broker_dir"].as_str().unwrap().to_string(),
    };
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "the script failed ({}):\n{stdout}\n{stderr}", out.status);
    eprintln!("{stdout}");
    let bootstrap = left["bootstrap"].as_str().unwrap();
    let port = left["admin_port"].as_u64().unwrap() as u16;

    // Every position of the input topic, decided exactly once.
    let expected = input_positions(bootstrap, "quill.tickets.in", 4);
    assert_eq!(expected.len(), records, "every generated ticket was produced");
    let mut outs: Vec<(String, i32)> = CLASSES.iter().map(|c| (format!("quill.tickets.routed.{c}"), 2)).collect();
    outs.push(("quill.tickets.review".into(), 2));
    let mut col = Collector::new(bootstrap, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(60)), "every ticket decided");
    col.poll_for(Duration::from_secs(2));
    let t = tally(&expected, &col.per_source());
    eprintln!("kafka demo: {t:?}, {} decisions read", col.records.len());
    assert_eq!((t.missing, t.duplicates), (0, 0), "exactly one decision per ticket: {t:?}");

    // The decided ids are the generated ones.
    let generated: BTreeSet<String> = std::fs::read_to_string(dir.join("stream/tickets.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap()["id"].as_str().unwrap().to_string())
        .collect();
    let mut per_id: HashMap<String, usize> = HashMap::new();
    for r in &col.records {
        let d: serde_json::Value = serde_json::from_slice(&r.payload).expect("a decision is JSON");
        *per_id.entry(d["id"].as_str().expect("decision id").to_string()).or_default() += 1;
    }
    assert_eq!(per_id.keys().cloned().collect::<BTreeSet<_>>(), generated, "decided ids are the generated ticket ids");
    assert!(per_id.values().all(|&n| n == 1), "one decision per id");

    // The reviewers' id-only labels were resolved and learned on top of the base file.
    let (st, body) = http(port, "GET", "/model", None, b"").expect("the service answers /model");
    assert_eq!(st, 200, "{body}");
    let m: serde_json::Value = serde_json::from_str(&body).unwrap();
    let applied = m["labels_applied"].as_u64().unwrap();
    eprintln!("kafka demo: served {} with {applied} labels learned", m["model_version"]);
    assert!(applied >= 100, "labels learned while serving: {body}");
    assert!(m["model_version"].as_str().unwrap().ends_with(&format!("+{applied}")), "{body}");
}
