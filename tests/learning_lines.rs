//! Online learning without a broker: a label file folded before scoring, snapshots that make a restart replay nothing twice, a damaged snapshot passed over for the base, and a model trained offline that records the log's end.
//!
//! Index — what each test guards:
//! - `label_file_is_folded_before_scoring_and_restarts_replay_from_the_snapshot` — versions count labels once across restarts; refused label lines are dead letters once.
//! - `model_trained_with_label_offsets_end_replays_nothing` — `train --label-offsets end` records the label log's end.

use crate::common;

use std::path::Path;
use std::process::Command;

use common::data::train_model;
use common::test_dir;
use serde_json::{json, Value};
use sieveline::model::snapshot;

const NOVEL: &[&str] = &["glacier crampon bent", "crampon strap frayed", "ice axe pick chipped", "glacier rope sheath cut", "crampon anti-balling plate cracked"];

fn labels_file(dir: &Path, n: usize) -> std::path::PathBuf {
    let mut text = String::new();
    for i in 0..n {
        if i == 7 {
            text.push_str("{\"id\": \"broken\", \"class\":\n");
        }
        let e = json!({"id": format!("G-{i}"), "class": "defects", "fields": {"subject": NOVEL[i % NOVEL.len()], "body": format!("{} after one climb", NOVEL[(i + 2) % NOVEL.len()])}});
        text.push_str(&format!("{e}\n"));
    }
    let path = dir.join("labels.jsonl");
    std::fs::write(&path, text).unwrap();
    path
}

fn input_file(dir: &Path) -> std::path::PathBuf {
    let text: String = (0..20)
        .map(|i| format!("{}\n", json!({"id": format!("N-{i}"), "subject": NOVEL[i % NOVEL.len()], "body": "please help"})))
        .collect();
    let path = dir.join("in.jsonl");
    std::fs::write(&path, text).unwrap();
    path
}

/// Run the service over `input`, learning from `labels`; (decisions, dead letters, stderr).
fn run(model: &Path, input: &Path, labels: &Path, snap: &Path) -> (Vec<Value>, Vec<Value>, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .args(["run", "--model"])
        .arg(model)
        .arg("--input")
        .arg(input)
        .env("SIEVELINE__ADMIN__ENABLED", "false")
        .env("SIEVELINE__LEARNING__ENABLED", "true")
        .env("SIEVELINE__LEARNING__LABEL_PATH", labels)
        .env("SIEVELINE__SNAPSHOT__PATH", snap)
        .env("SIEVELINE_LOG", "info")
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(out.status.success(), "{stderr}");
    let lines: Vec<Value> = out.stdout.split(|b| *b == b'\n').filter(|l| !l.is_empty()).map(|l| serde_json::from_slice(l).unwrap()).collect();
    let (dead, decided): (Vec<Value>, Vec<Value>) = lines.into_iter().partition(|l| l["kind"] == "dead_letter");
    (decided, dead, stderr)
}

#[test]
fn label_file_is_folded_before_scoring_and_restarts_replay_from_the_snapshot() {
    let dir = test_dir("learn-lines");
    let model = train_model(&dir);
    let base_sum = snapshot::read(&model, None).unwrap().checksum;
    let labels = labels_file(&dir, 50);
    let input = input_file(&dir);
    let snap = dir.join("snap.svm");
    let want = format!("{}+50", &base_sum[..12]);

    let (decided, dead, _) = run(&model, &input, &labels, &snap);
    assert_eq!(decided.len(), 20);
    assert!(decided.iter().all(|d| d["model_version"] == want.as_str()), "{:?}", decided[0]);
    let defects = decided.iter().filter(|d| d["class"] == "defects").count();
    assert!(defects >= 18, "{defects} of 20 novel defect records recognised after 50 labels");
    assert_eq!(dead.len(), 1, "{dead:?}");
    assert_eq!(dead[0]["reason"], "malformed label");
    assert_eq!(dead[0]["source"]["topic"], "file:labels.jsonl");
    assert_eq!(dead[0]["source"]["offset"], 7);
    let s1 = snapshot::read(&snap, None).unwrap();
    assert_eq!(s1.meta.label_offsets["file:labels.jsonl"][&0], 51);
    assert_eq!(s1.meta.base, base_sum);

    // A restart loads the snapshot and replays nothing twice.
    let (decided, dead, stderr) = run(&model, &input, &labels, &snap);
    assert!(stderr.contains("starting from snapshot"), "{stderr}");
    assert!(decided.iter().all(|d| d["model_version"] == want.as_str()), "{:?}", decided[0]);
    assert!(dead.is_empty(), "the refused line was folded before the snapshot: {dead:?}");
    assert_eq!(snapshot::read(&snap, None).unwrap().model.fingerprint(), s1.model.fingerprint());

    // A damaged snapshot is passed over: the base is loaded and the whole log replayed.
    let mut bytes = std::fs::read(&snap).unwrap();
    let n = bytes.len();
    bytes.truncate(n - 40);
    std::fs::write(&snap, &bytes).unwrap();
    let (decided, dead, stderr) = run(&model, &input, &labels, &snap);
    assert!(stderr.contains("refused"), "{stderr}");
    assert!(decided.iter().all(|d| d["model_version"] == want.as_str()));
    assert_eq!(dead.len(), 1);
    assert_eq!(snapshot::read(&snap, None).unwrap().model.fingerprint(), s1.model.fingerprint(), "rewritten whole");
}

#[test]
fn model_trained_with_label_offsets_end_replays_nothing() {
    let dir = test_dir("learn-offsets-end");
    let labels = labels_file(&dir, 20);
    let mut train = String::new();
    for i in 0..40 {
        let class = ["billing", "returns"][i % 2];
        train.push_str(&format!("{}\n", json!({"subject": format!("{class} question {i}"), "body": "about my order", "label": class})));
    }
    let train_path = dir.join("train.jsonl");
    std::fs::write(&train_path, train).unwrap();
    let model = dir.join("offline.svm");
    let out = Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .args(["train", "--input"])
        .arg(&train_path)
        .arg("--out")
        .arg(&model)
        .args(["--label-offsets", "end"])
        .env("SIEVELINE__LEARNING__LABEL_PATH", &labels)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let loaded = snapshot::read(&model, None).unwrap();
    assert_eq!(loaded.meta.label_offsets["file:labels.jsonl"][&0], 21, "20 events and one refused line");
    let (decided, dead, _) = run(&model, &input_file(&dir), &labels, &dir.join("snap.svm"));
    assert!(decided.iter().all(|d| d["model_version"] == format!("{}+0", &loaded.checksum[..12]).as_str()));
    assert!(dead.is_empty());
}
