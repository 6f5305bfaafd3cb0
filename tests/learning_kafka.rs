//! Online learning against a real broker: labels change decisions and equal an offline fold, corrections undo the wrong lesson, bad label events become dead letters, replicas (one SIGKILLed and restarted from its snapshot) converge on the counts of a rebuild from the label topic, and a model swapped in at 20,000 records/s loses nothing and switches once per partition, after a truncated file and one with other analyzer settings were refused mid-stream while the old model kept serving.
//!
//! Delivery semantics follow Kafka's at-least-once consumption: the
//! learned-label topic is read by assignment and its position lives in
//! snapshots, so a replay after a crash refolds nothing twice (offsets below a
//! snapshot's are skipped) and misses nothing (everything above is read).

use crate::common;

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use common::data::{self, Rng, CLASSES, PHRASES};
use common::kafka::{create_topics, produce_all, produce_records, topic_size, Collector};
use common::process::{Scenario, ServiceProc};
use common::{brokers, http, test_dir, wait_for};
use serde_json::{json, Value};
use sieveline::learn::{Folder, UnknownClassPolicy};
use sieveline::model::snapshot;
use sieveline::settings::Settings;
use sieveline::text::Analyzer;

/// A base model that knows billing, returns and shipping, and has a defects
/// class with none of its vocabulary (one unrelated record).
fn base_model(dir: &Path) -> PathBuf {
    let mut rng = Rng::new(7);
    let mut text = String::new();
    for i in 0..600 {
        let c = [0usize, 2, 3][i % 3];
        let v = json!({"id": format!("B-{i}"), "subject": data::phrase(c, &mut rng), "body": data::phrase(c, &mut rng), "label": CLASSES[c]});
        text.push_str(&format!("{v}\n"));
    }
    text.push_str(&format!("{}\n", json!({"id": "B-d", "subject": "question", "body": "a general question", "label": "defects"})));
    let train = dir.join("base-train.jsonl");
    std::fs::write(&train, text).unwrap();
    let model = dir.join("base.svm");
    run_ok(&["train", "--input", train.to_str().unwrap(), "--out", model.to_str().unwrap()], None);
    model
}

fn run_ok(args: &[&str], config: Option<&Path>) -> String {
    let mut c = std::process::Command::new(env!("CARGO_BIN_EXE_sieveline"));
    if let Some(cfg) = config {
        c.arg("--config").arg(cfg);
    }
    let out = c.args(args).output().unwrap();
    assert!(out.status.success(), "sieveline {args:?} failed: {}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn defects_ticket(id: &str, rng: &mut Rng) -> Value {
    let p = PHRASES[1].1;
    let a = p[rng.below(p.len() as u64) as usize];
    let b = p[rng.below(p.len() as u64) as usize];
    json!({"id": id, "subject": a, "body": format!("{b} - order {}", 1000 + rng.below(9000))})
}

fn as_inputs(records: &[Value]) -> Vec<data::Input> {
    records
        .iter()
        .map(|r| data::Input { key: r["id"].as_str().unwrap().as_bytes().to_vec(), payload: r.to_string().into_bytes(), malformed: None })
        .collect()
}

fn complete(record: &Value, class: &str, replaces: Option<&str>) -> Vec<u8> {
    let mut e = json!({"id": record["id"], "class": class, "fields": {"subject": record["subject"], "body": record["body"]}});
    if let Some(r) = replaces {
        e["replaces"] = json!(r);
    }
    e.to_string().into_bytes()
}

fn keyed(id: &Value, payload: Vec<u8>) -> (Option<i32>, Option<Vec<u8>>, Vec<u8>) {
    (None, Some(id.as_str().unwrap().as_bytes().to_vec()), payload)
}

/// Decisions read back for the given record ids: id → (class, model_version).
fn decisions_for(c: &mut Collector, ids: &[String], limit: Duration) -> HashMap<String, (String, String)> {
    let deadline = Instant::now() + limit;
    loop {
        let mut found = HashMap::new();
        for r in &c.records {
            if let Ok(v) = serde_json::from_slice::<Value>(&r.payload) {
                if let Some(id) = v["id"].as_str().filter(|id| ids.iter().any(|x| x == id)) {
                    found.insert(id.to_string(), (v["class"].as_str().unwrap_or("").to_string(), v["model_version"].as_str().unwrap_or("").to_string()));
                }
            }
        }
        if found.len() == ids.len() || Instant::now() >= deadline {
            assert_eq!(found.len(), ids.len(), "decisions read back for {} of {} records", found.len(), ids.len());
            return found;
        }
        c.poll_for(Duration::from_millis(300));
    }
}

fn model_info(p: &ServiceProc) -> Value {
    let (st, body) = http(p.port, "GET", "/model?fingerprint=1", None, b"").expect("GET /model");
    assert_eq!(st, 200, "{body}");
    serde_json::from_str(&body).unwrap()
}

fn learning_extra(prefix: &str, snapshot: &Path, raw: Option<&str>) -> String {
    format!(
        "[learning]\nenabled = true\nlabel_topic = \"{prefix}.labels\"\nraw_label_topic = \"{}\"\npublish_interval_ms = 100\n\n[snapshot]\npath = \"{}\"\ninterval_ms = 500\n",
        raw.unwrap_or(""),
        snapshot.display()
    )
}

fn fingerprint_of(path: &Path) -> (String, snapshot::Loaded) {
    let l = snapshot::read(path, None).unwrap();
    (l.model.fingerprint(), l)
}

#[test]
fn labels_change_decisions_corrections_undo_and_bad_events_are_dead_lettered() {
    let brokers = brokers();
    let dir = test_dir("learn-labels");
    let base = base_model(&dir);
    let mut sc = Scenario::new("learn", &brokers, &base, &dir, 2);
    let labels_topic = format!("{}.labels", sc.prefix);
    let snap = dir.join("snapshot.svm");
    sc.extra = learning_extra(&sc.prefix, &snap, None);
    let outs = sc.create_topics(CLASSES);
    create_topics(&brokers, &[(&labels_topic, 3)]);
    let mut svc = sc.start("a");
    svc.wait_ready(Duration::from_secs(60));
    let mut rng = Rng::new(11);

    // Before any label, defect tickets are not recognised.
    let before: Vec<Value> = (0..40).map(|i| defects_ticket(&format!("D-A-{i}"), &mut rng)).collect();
    produce_all(&brokers, &sc.input, &as_inputs(&before));
    let mut col = Collector::new(&brokers, &outs);
    let ids: Vec<String> = before.iter().map(|r| r["id"].as_str().unwrap().to_string()).collect();
    let got = decisions_for(&mut col, &ids, Duration::from_secs(60));
    let defects_before = got.values().filter(|(c, _)| c == "defects").count();
    let base_version = got.values().next().unwrap().1.clone();
    assert!(base_version.ends_with("+0"), "{base_version}");
    assert!(defects_before < 10, "{defects_before} of 40 called defects before any label");

    // Labels: 30 confirmations, one wrong label and its correction, three bad events.
    let mut labels: Vec<_> = before[..30].iter().map(|r| keyed(&r["id"], complete(r, "defects", None))).collect();
    let x = &before[30];
    labels.push(keyed(&x["id"], complete(x, "returns", None)));
    labels.push(keyed(&x["id"], complete(x, "defects", Some("returns"))));
    labels.push((None, Some(b"bad-1".to_vec()), b"{\"id\": \"D-A-31\", \"class\": ".to_vec()));
    labels.push((None, Some(b"bad-2".to_vec()), complete(&before[32], "warranty", None)));
    labels.push((None, Some(b"bad-3".to_vec()), br#"{"id": "D-A-33", "class": "defects"}"#.to_vec()));
    let sent = Instant::now();
    produce_records(&brokers, &labels_topic, &labels);
    let want = format!("{}+32", base_version.trim_end_matches("+0"));
    wait_for(Duration::from_secs(30), "the 32 labels to be served", || {
        (model_info(&svc)["model_version"].as_str() == Some(want.as_str())).then_some(())
    });
    eprintln!("labels produced → served in {:?} (upper bound: includes the admin polling interval)", sent.elapsed());

    // After the labels, new defect tickets are recognised, scored by the new version.
    let after: Vec<Value> = (0..40).map(|i| defects_ticket(&format!("D-B-{i}"), &mut rng)).collect();
    produce_all(&brokers, &sc.input, &as_inputs(&after));
    let ids: Vec<String> = after.iter().map(|r| r["id"].as_str().unwrap().to_string()).collect();
    let got = decisions_for(&mut col, &ids, Duration::from_secs(60));
    let defects_after = got.values().filter(|(c, _)| c == "defects").count();
    eprintln!("defects recognised: {defects_before}/40 before the labels, {defects_after}/40 after");
    assert!(defects_after >= 32, "{defects_after} of 40 called defects after 30 labels");
    assert!(got.values().all(|(_, v)| *v == want), "every later decision carries {want}");

    // The three bad events are dead letters with their reasons; the loop went on.
    col.poll_for(Duration::from_secs(1));
    let reasons: Vec<String> = col
        .records
        .iter()
        .filter(|r| r.topic == sc.dead_topic() && r.header("sieveline.source.topic").as_deref() == Some(labels_topic.as_str()))
        .filter_map(|r| r.header("sieveline.reason"))
        .collect();
    let mut sorted = reasons.clone();
    sorted.sort();
    assert_eq!(sorted, ["malformed label", "missing field", "unknown class"], "label dead letters: {reasons:?}");

    // SIGTERM: a last snapshot with the offsets of all 35 events.
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(30)).expect("exit after SIGTERM").success());
    let (service_fp, loaded) = fingerprint_of(&snap);
    let folded: i64 = loaded.meta.label_offsets[&labels_topic].values().sum();
    assert_eq!(folded, 35);
    assert_eq!(loaded.meta.labels_learned, 32);

    // An offline fold of the topic (the service's folding code, run by `train --from-topic`) gives the same counts.
    let cfg = sc.settings_file(common::free_port(), "offline");
    let rebuilt = dir.join("rebuilt.svm");
    run_ok(&["train", "--from-topic", "--base", base.to_str().unwrap(), "--out", rebuilt.to_str().unwrap()], Some(&cfg));
    assert_eq!(fingerprint_of(&rebuilt).0, service_fp, "offline fold of the label topic");

    // The correction leaves the counts of learning the record as defects alone.
    let s = Settings::defaults();
    let b = snapshot::read(&base, None).unwrap();
    let mut alone = Folder::new(b.model, &b.meta, Analyzer::new(&s.analyzer).unwrap(), s.input.fields.clone(), UnknownClassPolicy::Reject);
    for (i, r) in before[..31].iter().enumerate() {
        alone.apply("direct", 0, i as i64, &complete(r, "defects", None));
    }
    assert_eq!(alone.model().fingerprint(), service_fp, "wrong label + correction == the right label alone");
}

#[test]
fn three_replicas_converge_after_sigkill_and_equal_a_rebuild_from_the_topic() {
    let brokers = brokers();
    let dir = test_dir("learn-replicas");
    let base = base_model(&dir);
    let sc = Scenario::new("conv", &brokers, &base, &dir, 3);
    let labels_topic = format!("{}.labels", sc.prefix);
    let raw_topic = format!("{}.raw-labels", sc.prefix);
    let outs = sc.create_topics(CLASSES);
    create_topics(&brokers, &[(&labels_topic, 3), (&raw_topic, 3)]);
    let start = |tag: &str| {
        let mut r = sc.clone();
        r.extra = learning_extra(&sc.prefix, &dir.join(format!("snapshot-{tag}.svm")), Some(&raw_topic));
        let mut p = r.start(tag);
        p.wait_ready(Duration::from_secs(60));
        p
    };
    let r1 = start("r1");
    let mut r2 = start("r2");
    let r3 = start("r3");

    // Records keyed by customer, not by id: raw labels carry the input partition from the decision.
    let records = data::stream(600, 40, None, 21);
    produce_all(&brokers, &sc.input, &records);
    let mut col = Collector::new(&brokers, &outs);
    let expected = common::kafka::input_positions(&brokers, &sc.input, 3);
    assert!(col.until_covered(&expected, Duration::from_secs(90)), "every record decided");
    let mut decided: Vec<(String, String, i32)> = Vec::new();
    for r in &col.records {
        let v: Value = match serde_json::from_slice(&r.payload) {
            Ok(v) => v,
            Err(_) => continue,
        };
        if let (Some(id), Some(class)) = (v["id"].as_str(), v["class"].as_str()) {
            decided.push((id.to_string(), class.to_string(), r.source().0));
        }
    }
    decided.sort();
    decided.dedup_by(|a, b| a.0 == b.0);

    // Id-only labels, with wrong ones corrected later, an unknown id and a malformed one.
    let mut raw: Vec<(Option<i32>, Option<Vec<u8>>, Vec<u8>)> = Vec::new();
    let mut corrections = Vec::new();
    for (n, (id, class, part)) in decided.iter().take(420).enumerate() {
        let key = Some(id.as_bytes().to_vec());
        if n % 7 == 3 {
            let wrong = CLASSES.iter().find(|c| **c != class.as_str()).unwrap();
            raw.push((Some(*part), key.clone(), json!({"id": id, "class": wrong}).to_string().into_bytes()));
            corrections.push((Some(*part), key, json!({"id": id, "class": class, "replaces": wrong}).to_string().into_bytes()));
        } else {
            raw.push((Some(*part), key, json!({"id": id, "class": class}).to_string().into_bytes()));
        }
        if n % 60 == 59 {
            raw.append(&mut corrections);
        }
    }
    raw.append(&mut corrections);
    raw.push((Some(0), Some(b"nobody".to_vec()), br#"{"id": "never-scored", "class": "billing"}"#.to_vec()));
    raw.push((Some(1), None, b"{\"id\": ".to_vec()));
    raw.push((Some(2), Some(b"x".to_vec()), br#"{"id": "never-scored-2", "class": "billing"}"#.to_vec()));

    // Labels flow in batches; replica 2 is SIGKILLed in the middle and restarted from its snapshot.
    let batches: Vec<_> = raw.chunks(raw.len() / 6 + 1).map(<[_]>::to_vec).collect();
    for (i, b) in batches.iter().enumerate() {
        produce_records(&brokers, &raw_topic, b);
        std::thread::sleep(Duration::from_millis(700));
        if i == 2 {
            r2.kill9();
            std::thread::sleep(Duration::from_millis(500));
        }
        if i == 3 {
            r2 = start("r2");
            assert!(r2.log_text().contains("starting from snapshot"), "replica 2 restarts from its snapshot:\n{}", r2.log_text());
        }
    }

    // Both replicas read the whole learned-label log, then hold the same counts.
    let total = wait_for(Duration::from_secs(60), "resolved labels to settle", || {
        let a = topic_size(&brokers, &labels_topic, 3);
        std::thread::sleep(Duration::from_millis(1500));
        (a > 0 && topic_size(&brokers, &labels_topic, 3) == a).then_some(a)
    });
    let caught_up = |p: &ServiceProc| {
        let info = model_info(p);
        let read: i64 = info["label_offsets"][&labels_topic].as_object().map(|o| o.values().map(|v| v.as_i64().unwrap()).sum()).unwrap_or(0);
        (read == total).then_some(info)
    };
    let i1 = wait_for(Duration::from_secs(60), "replica 1 to fold the whole log", || caught_up(&r1));
    let i2 = wait_for(Duration::from_secs(60), "replica 2 to fold the whole log", || caught_up(&r2));
    let i3 = wait_for(Duration::from_secs(60), "replica 3 to fold the whole log", || caught_up(&r3));
    eprintln!(
        "learned-label log: {total} events; replicas 1/2/3 {} / {} / {} labels on top; fingerprints {} / {} / {}",
        i1["labels_applied"], i2["labels_applied"], i3["labels_applied"], i1["fingerprint"], i2["fingerprint"], i3["fingerprint"]
    );
    assert_eq!(i1["fingerprint"], i2["fingerprint"], "replica 1 and 2 fingerprints");
    assert_eq!(i1["fingerprint"], i3["fingerprint"], "replica 1 and 3 fingerprints");
    assert_eq!(i1["model_version"], i2["model_version"]);
    assert_eq!(i1["model_version"], i3["model_version"]);
    assert!(i1["labels_applied"].as_u64().unwrap() > 100, "labels resolved and learned: {}", i1["labels_applied"]);

    // A rebuild from the learned-label topic gives the same counts.
    let cfg = sc.settings_file(common::free_port(), "rebuild");
    let rebuilt = dir.join("rebuilt.svm");
    run_ok(&["train", "--from-topic", &labels_topic, "--base", base.to_str().unwrap(), "--out", rebuilt.to_str().unwrap()], Some(&cfg));
    assert_eq!(Value::String(fingerprint_of(&rebuilt).0), i1["fingerprint"], "rebuild from the topic");

    // The unknown id and the malformed raw label are dead letters with their reasons.
    col.poll_for(Duration::from_secs(2));
    let reasons: Vec<String> = col
        .records
        .iter()
        .filter(|r| r.topic == sc.dead_topic() && r.header("sieveline.source.topic").as_deref() == Some(raw_topic.as_str()))
        .filter_map(|r| r.header("sieveline.reason"))
        .collect();
    assert!(reasons.iter().any(|r| r == "malformed label"), "{reasons:?}");
    assert!(reasons.iter().any(|r| r == "unknown id"), "{reasons:?}");
    eprintln!("raw-label dead letters: {} ({} unknown id: records scored by the other replica before a rebalance, or never)", reasons.len(), reasons.iter().filter(|r| *r == "unknown id").count());
}

/// A model trained on the same file as `data::train_model` but with bigrams on: other analyzer settings.
fn train_with_bigrams(dir: &Path) -> Vec<u8> {
    let out_path = dir.join("bigrams.svm");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .env("SIEVELINE__ANALYZER__BIGRAMS", "true")
        .args(["train", "--input"])
        .arg(dir.join("train.jsonl"))
        .arg("--out")
        .arg(&out_path)
        .output()
        .unwrap();
    assert!(out.status.success(), "train failed: {}", String::from_utf8_lossy(&out.stderr));
    std::fs::read(out_path).unwrap()
}

#[test]
fn model_swapped_in_at_20k_records_per_second_switches_once_per_partition() {
    let brokers = brokers();
    let dir = test_dir("learn-swap");
    let live = dir.join("live.svm");
    std::fs::copy(base_model(&dir), &live).unwrap();
    let mut sc = Scenario::new("swap", &brokers, &live, &dir, 4);
    sc.max_in_flight = 10_000;
    let labels_topic = format!("{}.labels", sc.prefix);
    sc.extra = learning_extra(&sc.prefix, &dir.join("snapshot.svm"), None);
    let outs = sc.create_topics(CLASSES);
    create_topics(&brokers, &[(&labels_topic, 1)]);
    let mut svc = sc.start("a");
    svc.wait_ready(Duration::from_secs(60));
    let old_version = model_info(&svc)["model_version"].as_str().unwrap().to_string();

    // A newly trained model (all four classes) waits beside the served file.
    let fresh = data::train_model(&dir);
    let new_sum = snapshot::read(&fresh, None).unwrap().checksum;
    let new_version = format!("{}+0", &new_sum[..12]);

    let n = 80_000;
    let feeder = common::kafka::Feeder::start(&brokers, &sc.input, data::stream(n, 64, None, 5), 20_000);
    wait_for(Duration::from_secs(30), "a third of the stream to be scored", || {
        (svc.counter("sieveline_records_in_total").unwrap_or(0.0) >= (n / 3) as f64).then_some(())
    });
    // Broken files first, renamed over the served one while the stream runs: each is refused
    // (by the watcher and by the admin call) and the old model keeps serving.
    let good = std::fs::read(&fresh).unwrap();
    let other_analyzer = train_with_bigrams(&dir);
    let bad: [(&str, Vec<u8>, &str); 2] =
        [("truncated", good[..good.len() / 2].to_vec(), "truncated"), ("other analyzer settings", other_analyzer, "other analyzer settings")];
    let tmp = dir.join("live.svm.tmp");
    for (what, bytes, why) in &bad {
        std::fs::write(&tmp, bytes).unwrap();
        std::fs::rename(&tmp, &live).unwrap();
        let (st, body) = http(svc.port, "POST", "/reload?what=model", None, b"").expect("POST /reload");
        assert_eq!(st, 422, "{what}: {body}");
        assert!(body.contains(why), "{what}: {body}");
        assert_eq!(model_info(&svc)["model_version"].as_str().unwrap(), old_version, "{what}: the old model keeps serving");
    }
    let refused = svc.metrics().map(|m| common::sample(&m, "sieveline_reloads_total", &[("target", "model"), ("result", "refused")])).unwrap();
    assert!(refused >= 2.0, "each broken file counted as a refused reload ({refused})");

    // Deploy it the way an operator would: rename over the served file, then ask for a reload.
    std::fs::copy(&fresh, &tmp).unwrap();
    std::fs::rename(&tmp, &live).unwrap();
    let (st, body) = http(svc.port, "POST", "/reload?what=model", None, b"").expect("POST /reload");
    assert_eq!(st, 200, "{body}");
    feeder.finish();

    let mut col = Collector::new(&brokers, &outs);
    let expected = common::kafka::input_positions(&brokers, &sc.input, 4);
    assert!(col.until_covered(&expected, Duration::from_secs(120)), "every record decided");
    col.poll_for(Duration::from_secs(1));
    let tally = common::kafka::tally(&expected, &col.per_source());
    assert_eq!((tally.missing, tally.duplicates), (0, 0), "no record lost or scored twice: {tally:?}");

    // Per partition, in offset order: the old version, then the new one from a single offset on.
    let mut per_part: HashMap<i32, Vec<(i64, String)>> = HashMap::new();
    for r in &col.records {
        let v: Value = serde_json::from_slice(&r.payload).unwrap();
        let (p, o) = r.source();
        per_part.entry(p).or_default().push((o, v["model_version"].as_str().unwrap().to_string()));
    }
    let mut switched = 0;
    for (p, mut v) in per_part {
        v.sort();
        let first_new = v.iter().position(|(_, ver)| *ver == new_version);
        let (old, new) = v.split_at(first_new.unwrap_or(v.len()));
        assert!(old.iter().all(|(_, ver)| *ver == old_version), "partition {p}: before the switch only {old_version}");
        assert!(new.iter().all(|(_, ver)| *ver == new_version), "partition {p}: after offset {:?} only {new_version}", new.first());
        switched += usize::from(!new.is_empty() && !old.is_empty());
        eprintln!("partition {p}: {} records on {old_version}, {} on {new_version} from offset {:?}", old.len(), new.len(), new.first().map(|x| x.0));
    }
    assert!(switched >= 3, "the swap happened mid-stream on the partitions ({switched} of 4)");
    svc.signal("TERM");
    assert!(svc.wait_exit(Duration::from_secs(30)).expect("exit").success());
}
