//! Hot reload of rules and model in a running service (a real `sieveline run` process reading a stream on stdin, so no broker is needed).
//!
//! Index — what each test guards:
//! 1. `rules_file_renamed_over_while_streaming_switches_decisions_and_a_broken_one_is_refused` — issue 5 test 4: a rules file written elsewhere and renamed over the served one (as an editor or deploy does) is picked up by the watcher; records decided after the swap follow the new rules (`decided_by` names the new rule), a broken file next is refused (counter on `/metrics`, old rules keep deciding), SIGHUP reloads model and rules, `POST /reload` answers 422 naming file, line and rule; a review guard sends records to the review topic with reason `rule`; `/metrics` parses with the exposition-format reference parser (Python prometheus_client).
//! 2. `sighup_and_post_reload_each_reload_and_reload_needs_the_token_off_loopback` — with the watcher off, a changed file is not picked up until SIGHUP, then `POST /reload?what=rules`; without the bearer token (RFC 6750) the call is 401; a bad `what` is 400.
//! 3. `truncated_corrupt_and_foreign_analyzer_models_are_refused_and_a_good_one_is_picked_up` — each bad model file renamed over the served one is refused by the watcher and by `POST /reload` while the old model keeps serving (`/model`, decisions' `model_version`); a good new file is served next.
//! 4. `a_broken_rules_file_at_start_is_a_settings_error` — exit code 2, the message names the file, the line and the rule.
//! 5. `with_learning_on_a_model_reload_goes_through_the_learner_and_replays_the_label_log` — the watcher's reload of a good file serves it with the label log replayed on top (version `<checksum>+<labels>`), a truncated one is refused by the learner.

use crate::common;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, Stdio};
use std::time::Duration;

use common::{free_port, http, parse_metrics_reference, sample, test_dir, wait_for};

const LIMIT: Duration = Duration::from_secs(30);

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_sieveline"))
}

/// Write `text` next to `path` and rename it over `path`, as an editor or a deploy step does.
fn replace_atomically(path: &Path, bytes: &[u8]) {
    let tmp = path.with_extension("incoming");
    std::fs::write(&tmp, bytes).unwrap();
    std::fs::rename(&tmp, path).unwrap();
}

/// A rules file: `tent` tickets go to `class` by rule `tent_id`, and a review
/// guard sends leaking stoves to a person.
fn rules_text(tent_id: &str, class: &str) -> String {
    format!(
        r#"[[rule]]
id = "{tent_id}"
class = "{class}"
action = "assign"
  [[rule.when]]
  any = ["tent"]

[[rule]]
id = "stove-guard"
class = "defects"
action = "review"
guard = true
note = "a leaking stove is a hazard: a person looks at it"
  [[rule.when]]
  all = ["stove", "leaks"]
"#
    )
}

/// Line 12 holds a regex that does not compile, in rule "broken-rule".
const BROKEN_RULES: &str = r#"[[rule]]
id = "tent-v9"
class = "billing"
action = "assign"
  [[rule.when]]
  any = ["tent"]
[[rule]]
id = "broken-rule"
class = "returns"
action = "assign"
  [[rule.when]]
  regex = '(unclosed'
"#;

/// Train a model with the real binary on `n` labelled tickets; `env` adds settings.
fn train(dir: &Path, name: &str, n: usize, version: &str, env: &[(&str, &str)]) -> PathBuf {
    let phrases: [(&str, [&str; 3]); 4] = [
        ("billing", ["charged twice for my order", "invoice total is wrong", "payment declined at checkout"]),
        ("defects", ["tent pole snapped on first use", "camp stove leaks fuel", "headlamp flickers and dies"]),
        ("returns", ["want to return the hiking boots", "need a return label", "send back the unused tent"]),
        ("shipping", ["parcel has not arrived", "tracking shows no update", "courier lost my package"]),
    ];
    let mut text = String::new();
    for i in 0..n {
        let (label, p) = &phrases[i % 4];
        let v = serde_json::json!({"id": format!("L-{i}"), "subject": p[i % 3], "body": p[(i / 4) % 3], "label": label});
        text.push_str(&format!("{v}\n"));
    }
    let input = dir.join(format!("{name}.jsonl"));
    std::fs::write(&input, text).unwrap();
    let out = dir.join(format!("{name}.svm"));
    let mut cmd = bin();
    cmd.args(["train", "--input"]).arg(&input).arg("--out").arg(&out).args(["--model-version", version]);
    for (k, v) in env {
        cmd.env(k, v);
    }
    let o = cmd.output().unwrap();
    assert!(o.status.success(), "train failed: {}", String::from_utf8_lossy(&o.stderr));
    out
}

/// A `sieveline run` process fed on stdin; outputs are read when it ends.
struct Svc {
    child: Option<Child>,
    stdin: Option<ChildStdin>,
    port: u16,
    token: Option<String>,
    sent: usize,
    log: PathBuf,
}

impl Svc {
    /// Start on a free port; the log goes to `service.log` beside the model.
    fn start(model: &Path, rules: Option<&Path>, env: &[(&str, String)], bind_any: bool, token: Option<&str>) -> Svc {
        let log = model.parent().unwrap().join("service.log");
        let logf = std::fs::OpenOptions::new().create(true).append(true).open(&log).unwrap();
        let port = free_port();
        let host = if bind_any { "0.0.0.0" } else { "127.0.0.1" };
        let mut cmd = bin();
        cmd.args(["run", "--model"]).arg(model);
        if let Some(r) = rules {
            cmd.arg("--rules").arg(r);
        }
        cmd.env("SIEVELINE__ADMIN__BIND", format!("{host}:{port}"))
            .env("SIEVELINE__RELOAD__DEBOUNCE_MS", "100")
            .env("SIEVELINE_LOG", "info")
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(logf);
        if let Some(t) = token {
            cmd.env("SIEVELINE__ADMIN__TOKEN", t);
        }
        for (k, v) in env {
            cmd.env(k, v);
        }
        let mut child = cmd.spawn().unwrap();
        let stdin = child.stdin.take();
        wait_for(LIMIT, "the admin endpoint", || {
            if let Ok(Some(st)) = child.try_wait() {
                panic!("service exited early: {st}; log {}:\n{}", log.display(), std::fs::read_to_string(&log).unwrap_or_default());
            }
            http(port, "GET", "/readyz", None, b"").filter(|r| r.0 == 200)
        });
        Svc { child: Some(child), stdin, port, token: token.map(str::to_string), sent: 0, log }
    }

    /// Send one ticket and wait until it is decided (so what happens next cannot touch it).
    fn send(&mut self, id: &str, subject: &str) {
        let line = serde_json::json!({"id": id, "subject": subject, "body": subject}).to_string();
        let stdin = self.stdin.as_mut().expect("stdin open");
        stdin.write_all(line.as_bytes()).unwrap();
        stdin.write_all(b"\n").unwrap();
        stdin.flush().unwrap();
        self.sent += 1;
        let want = self.sent as f64;
        wait_for(LIMIT, &format!("record {id} decided"), || (self.metric_sum("sieveline_decided_by_total") >= want).then_some(()));
    }

    fn get(&self, path: &str) -> (u16, String) {
        http(self.port, "GET", path, self.token.as_deref(), b"").expect("admin answers")
    }

    fn post(&self, path: &str, token: Option<&str>) -> (u16, serde_json::Value) {
        let (st, body) = http(self.port, "POST", path, token, b"").expect("admin answers");
        (st, serde_json::from_str(&body).unwrap_or(serde_json::Value::String(body)))
    }

    fn metrics_text(&self) -> String {
        self.get("/metrics").1
    }

    /// One sample of the exposition text whose labels include all of `labels` (0 if absent).
    fn metric(&self, name: &str, labels: &[(&str, &str)]) -> f64 {
        metric_in(&self.metrics_text(), name, labels)
    }

    fn metric_sum(&self, name: &str) -> f64 {
        let text = self.metrics_text();
        text.lines()
            .filter(|l| l.starts_with(name) && matches!(l.as_bytes().get(name.len()), Some(b'{' | b' ')))
            .filter_map(|l| l.rsplit(' ').next()?.parse::<f64>().ok())
            .sum()
    }

    fn wait_metric(&self, name: &str, labels: &[(&str, &str)], at_least: f64) {
        wait_for(LIMIT, &format!("{name}{labels:?} >= {at_least}"), || (self.metric(name, labels) >= at_least).then_some(()));
    }

    fn model_info(&self) -> serde_json::Value {
        let (st, body) = self.get("/model");
        assert_eq!(st, 200, "{body}");
        serde_json::from_str(&body).unwrap()
    }

    fn rules_info(&self) -> serde_json::Value {
        let (st, body) = self.get("/rules");
        assert_eq!(st, 200, "{body}");
        serde_json::from_str(&body).unwrap()
    }

    fn signal(&self, sig: &str) {
        let pid = self.child.as_ref().expect("running").id();
        let st = Command::new("kill").arg(format!("-{sig}")).arg(pid.to_string()).status().unwrap();
        assert!(st.success());
    }

    /// End the input; the service drains and exits 0. Outputs by record id.
    fn finish(mut self) -> std::collections::HashMap<String, serde_json::Value> {
        drop(self.stdin.take());
        let out = self.child.take().expect("running").wait_with_output().unwrap();
        let log = std::fs::read_to_string(&self.log).unwrap_or_default();
        assert!(out.status.success(), "service failed ({}); log {}:\n{log}", out.status, self.log.display());
        let mut by_id = std::collections::HashMap::new();
        for l in out.stdout.split(|b| *b == b'\n').filter(|l| !l.is_empty()) {
            let v: serde_json::Value = serde_json::from_slice(l).expect("JSON line");
            by_id.insert(v["id"].as_str().expect("id").to_string(), v);
        }
        by_id
    }
}

impl Drop for Svc {
    fn drop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

fn metric_in(text: &str, name: &str, labels: &[(&str, &str)]) -> f64 {
    text.lines()
        .filter(|l| l.starts_with(name) && matches!(l.as_bytes().get(name.len()), Some(b'{' | b' ')))
        .find(|l| labels.iter().all(|(k, v)| l.contains(&format!("{k}=\"{v}\""))))
        .and_then(|l| l.rsplit(' ').next()?.parse().ok())
        .unwrap_or(0.0)
}

const RELOADS: &str = "sieveline_reloads_total";

#[test]
fn rules_file_renamed_over_while_streaming_switches_decisions_and_a_broken_one_is_refused() {
    let dir = test_dir("reload-rules");
    let model = train(&dir, "base", 400, "base-1", &[]);
    let rules = dir.join("rules.toml");
    std::fs::write(&rules, rules_text("tent-v1", "returns")).unwrap();
    let mut svc = Svc::start(&model, Some(&rules), &[], false, None);
    let v1 = svc.rules_info();
    assert_eq!(v1["rules"], 2);

    svc.send("t-1", "tent pole snapped on first use");
    svc.send("s-1", "camp stove leaks fuel everywhere");

    // The new rules, written elsewhere and renamed over the served file.
    replace_atomically(&rules, rules_text("tent-v2", "shipping").as_bytes());
    svc.wait_metric(RELOADS, &[("target", "rules"), ("result", "ok")], 1.0);
    let v2 = svc.rules_info();
    assert_ne!(v2["fingerprint"], v1["fingerprint"]);
    svc.send("t-2", "tent pole snapped on first use");

    // A broken file next: refused, the rules of v2 keep deciding.
    replace_atomically(&rules, BROKEN_RULES.as_bytes());
    svc.wait_metric(RELOADS, &[("target", "rules"), ("result", "refused")], 1.0);
    assert_eq!(svc.rules_info()["fingerprint"], v2["fingerprint"], "the old rules are still served");
    svc.send("t-3", "tent pole snapped on first use");

    // SIGHUP reloads both: the model file is good, the rules file still broken.
    svc.signal("HUP");
    svc.wait_metric(RELOADS, &[("target", "model"), ("result", "ok")], 1.0);
    svc.wait_metric(RELOADS, &[("target", "rules"), ("result", "refused")], 2.0);

    // POST /reload (loopback, no token configured) answers what happened.
    let (st, report) = svc.post("/reload", None);
    assert_eq!(st, 422, "{report}");
    assert_eq!(report["trigger"], "admin");
    assert_eq!(report["model"]["result"], "ok");
    assert_eq!(report["model"]["serving_model"]["file_version"], "base-1");
    assert_eq!(report["rules"]["result"], "refused");
    let reason = report["rules"]["reason"].as_str().unwrap();
    assert!(reason.contains(&format!("{}:12:", rules.display())), "file and line of the regex: {reason}");
    assert!(reason.contains("rule \"broken-rule\"") && reason.contains("regex does not compile"), "{reason}");
    assert_eq!(report["rules"]["serving_rules"]["fingerprint"], v2["fingerprint"]);
    assert_eq!(svc.metric(RELOADS, &[("target", "rules"), ("result", "refused")]), 3.0);
    assert_eq!(svc.metric(RELOADS, &[("target", "rules"), ("result", "ok")]), 1.0, "a refusal never counts as ok");

    // The new metric families, read with the exposition-format reference parser.
    let m = parse_metrics_reference(&svc.metrics_text());
    assert_eq!(sample(&m, "sieveline_decided_by_total", &[("by", "rule")]), 3.0, "t-1, t-2, t-3");
    assert_eq!(sample(&m, "sieveline_decided_by_total", &[("by", "model")]), 1.0, "s-1: the guard reviews, the model decides");
    assert_eq!(sample(&m, "sieveline_rule_decisions_total", &[("rule", "tent-v2")]), 2.0);
    assert!(!m["sieveline_rule_decisions_total"].iter().any(|(l, _)| l["rule"] == "tent-v1"), "series of unloaded rules go");
    assert_eq!(sample(&m, "sieveline_rules_loaded", &[]), 2.0);
    assert!(sample(&m, "sieveline_last_reload_timestamp_seconds", &[("target", "rules")]) > 1.7e9);
    assert!(sample(&m, "sieveline_last_reload_timestamp_seconds", &[("target", "model")]) > 1.7e9);

    svc.send("t-4", "tent pole snapped on first use");
    let out = svc.finish();
    let by = |id: &str| (out[id]["decided_by"].as_str().unwrap().to_string(), out[id]["class"].as_str().unwrap().to_string());
    assert_eq!(by("t-1"), ("rule:tent-v1".to_string(), "returns".to_string()));
    for id in ["t-2", "t-3", "t-4"] {
        assert_eq!(by(id), ("rule:tent-v2".to_string(), "shipping".to_string()), "{id}: {}", out[id]);
        assert_eq!(out[id]["destination"], "sieveline.routed.shipping");
    }
    let s1 = &out["s-1"];
    assert_eq!(s1["kind"], "review", "{s1}");
    assert_eq!(s1["destination"], "sieveline.review");
    assert_eq!(s1["review"]["rule"]["id"], "stove-guard", "{s1}");
    assert_eq!(s1["decided_by"], "model");
}

#[test]
fn sighup_and_post_reload_each_reload_and_reload_needs_the_token_off_loopback() {
    let dir = test_dir("reload-triggers");
    let model = train(&dir, "base", 400, "base-1", &[]);
    let rules = dir.join("rules.toml");
    std::fs::write(&rules, rules_text("tent-v1", "returns")).unwrap();
    let token = "reload-test-token";
    let env = [("SIEVELINE__RELOAD__WATCH", "false".to_string())];
    let mut svc = Svc::start(&model, Some(&rules), &env, true, Some(token));
    assert_eq!(http(svc.port, "GET", "/rules", None, b"").unwrap().0, 401);
    svc.send("t-1", "tent pole snapped on first use");

    // Changed in place with the watcher off: nothing happens until a trigger.
    std::fs::write(&rules, rules_text("tent-v2", "shipping")).unwrap();
    std::thread::sleep(Duration::from_millis(400));
    svc.send("t-2", "tent pole snapped on first use");
    assert_eq!(svc.metric(RELOADS, &[("target", "rules"), ("result", "ok")]), 0.0);

    svc.signal("HUP");
    svc.wait_metric(RELOADS, &[("target", "rules"), ("result", "ok")], 1.0);
    assert_eq!(svc.metric(RELOADS, &[("target", "model"), ("result", "ok")]), 1.0, "SIGHUP reloads the model too");
    svc.send("t-3", "tent pole snapped on first use");

    std::fs::write(&rules, rules_text("tent-v3", "billing")).unwrap();
    let (st, _) = svc.post("/reload?what=rules", None);
    assert_eq!(st, 401, "no token");
    let (st, _) = svc.post("/reload?what=rules", Some("not-the-token"));
    assert_eq!(st, 401, "wrong token");
    assert_eq!(svc.metric(RELOADS, &[("target", "rules"), ("result", "ok")]), 1.0, "refused calls reload nothing");
    let (st, report) = svc.post("/reload?what=rules", Some(token));
    assert_eq!(st, 200, "{report}");
    assert_eq!(report["rules"]["result"], "ok");
    assert_eq!(report["rules"]["serving_rules"]["rules"], 2);
    assert!(report.get("model").is_none(), "only the rules were asked for: {report}");
    assert_eq!(svc.metric(RELOADS, &[("target", "rules"), ("result", "ok")]), 2.0);
    assert_eq!(svc.metric(RELOADS, &[("target", "model"), ("result", "ok")]), 1.0);
    let (st, body) = svc.post("/reload?what=everything", Some(token));
    assert_eq!(st, 400, "{body}");
    svc.send("t-4", "tent pole snapped on first use");

    let out = svc.finish();
    let rule_of = |id: &str| out[id]["decided_by"].as_str().unwrap().to_string();
    assert_eq!(rule_of("t-1"), "rule:tent-v1");
    assert_eq!(rule_of("t-2"), "rule:tent-v1", "no trigger, no reload");
    assert_eq!(rule_of("t-3"), "rule:tent-v2");
    assert_eq!(rule_of("t-4"), "rule:tent-v3");
    assert_eq!(out["t-4"]["class"], "billing");
}

#[test]
fn truncated_corrupt_and_foreign_analyzer_models_are_refused_and_a_good_one_is_picked_up() {
    let dir = test_dir("reload-model");
    let m1 = train(&dir, "base", 400, "base-1", &[]);
    let m2 = train(&dir, "next", 240, "next-2", &[]);
    let other = train(&dir, "bigrams", 400, "bigrams-1", &[("SIEVELINE__ANALYZER__BIGRAMS", "true")]);
    let serve_dir = dir.join("serve");
    std::fs::create_dir_all(&serve_dir).unwrap();
    let served = serve_dir.join("model.svm");
    std::fs::copy(&m1, &served).unwrap();
    let good = std::fs::read(&m1).unwrap();

    let mut svc = Svc::start(&served, None, &[], false, None);
    let first = svc.model_info();
    assert_eq!(first["file_version"], "base-1");
    svc.send("r-0", "parcel has not arrived");

    let truncated = good[..good.len() / 2].to_vec();
    let mut flipped = good.clone();
    let at = flipped.len() * 3 / 4;
    flipped[at] ^= 0x40;
    let cases: [(&str, Vec<u8>, &str); 3] = [
        ("truncated", truncated, "truncated"),
        ("one flipped byte", flipped, "corrupt"),
        ("other analyzer settings", std::fs::read(&other).unwrap(), "other analyzer settings"),
    ];
    for (k, (what, bytes, why)) in cases.iter().enumerate() {
        // Seen by the watcher: refused.
        replace_atomically(&served, bytes);
        let refused = 2.0 * k as f64 + 1.0;
        svc.wait_metric(RELOADS, &[("target", "model"), ("result", "refused")], refused);
        // Asked for by the admin call: refused, with the reason.
        let (st, report) = svc.post("/reload?what=model", None);
        assert_eq!(st, 422, "{what}: {report}");
        let reason = report["model"]["reason"].as_str().unwrap();
        assert!(reason.contains(why), "{what}: {reason}");
        assert_eq!(report["model"]["serving_model"]["checksum"], first["checksum"], "{what}");
        assert_eq!(svc.metric(RELOADS, &[("target", "model"), ("result", "refused")]), refused + 1.0);
        let now = svc.model_info();
        assert_eq!((&now["model_version"], &now["checksum"]), (&first["model_version"], &first["checksum"]), "{what}");
        svc.send(&format!("r-{}", k + 1), "parcel has not arrived");
    }
    assert_eq!(svc.metric(RELOADS, &[("target", "model"), ("result", "ok")]), 0.0);

    replace_atomically(&served, &std::fs::read(&m2).unwrap());
    svc.wait_metric(RELOADS, &[("target", "model"), ("result", "ok")], 1.0);
    let next = svc.model_info();
    assert_eq!(next["file_version"], "next-2");
    assert_ne!(next["checksum"], first["checksum"]);
    assert_ne!(next["model_version"], first["model_version"]);
    assert_eq!(svc.metric("sieveline_model_classes", &[]), 4.0);
    svc.send("r-4", "parcel has not arrived");

    let out = svc.finish();
    // Decisions carry the served version (base file checksum + labels applied).
    for id in ["r-0", "r-1", "r-2", "r-3"] {
        assert_eq!(out[id]["model_version"], first["model_version"], "{id}");
        assert_eq!(out[id]["decided_by"], "model");
    }
    assert_eq!(out["r-4"]["model_version"], next["model_version"]);
    assert_eq!(out["r-4"]["class"], "shipping");
}

#[test]
fn a_broken_rules_file_at_start_is_a_settings_error() {
    let dir = test_dir("reload-start");
    let model = train(&dir, "base", 200, "base-1", &[]);
    let rules = dir.join("broken.toml");
    std::fs::write(&rules, BROKEN_RULES).unwrap();
    let out = bin()
        .args(["run", "--model"])
        .arg(&model)
        .arg("--rules")
        .arg(&rules)
        .env("SIEVELINE__ADMIN__BIND", format!("127.0.0.1:{}", free_port()))
        .stdin(Stdio::null())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains(&format!("{}:12:", rules.display())) && err.contains("rule \"broken-rule\""), "{err}");
}

#[test]
fn with_learning_on_a_model_reload_goes_through_the_learner_and_replays_the_label_log() {
    let dir = test_dir("reload-learner");
    let m1 = train(&dir, "base", 400, "base-1", &[]);
    let m2 = train(&dir, "next", 240, "next-2", &[]);
    let sum = |p: &Path| sieveline::model::snapshot::read(p, None).unwrap().checksum;
    let labels = dir.join("labels.jsonl");
    let events: String = (0..10)
        .map(|i| {
            let e = serde_json::json!({"id": format!("G-{i}"), "class": "defects", "fields": {"subject": "crampon strap frayed", "body": "after one climb"}});
            format!("{e}\n")
        })
        .collect();
    std::fs::write(&labels, events).unwrap();
    let serve_dir = dir.join("serve");
    std::fs::create_dir_all(&serve_dir).unwrap();
    let served = serve_dir.join("model.svm");
    std::fs::copy(&m1, &served).unwrap();
    let env = [
        ("SIEVELINE__LEARNING__ENABLED", "true".to_string()),
        ("SIEVELINE__LEARNING__LABEL_PATH", labels.display().to_string()),
    ];
    let mut svc = Svc::start(&served, None, &env, false, None);
    let want1 = format!("{}+10", &sum(&m1)[..12]);
    wait_for(LIMIT, "the label log folded on the base", || (svc.model_info()["model_version"] == want1.as_str()).then_some(()));

    let good = std::fs::read(&m1).unwrap();
    replace_atomically(&served, &good[..good.len() / 3]);
    svc.wait_metric(RELOADS, &[("target", "model"), ("result", "refused")], 1.0);
    assert!(svc.metric("sieveline_model_loads_total", &[("result", "refused")]) >= 1.0, "the learner refused it");
    assert_eq!(svc.model_info()["model_version"], want1.as_str());
    svc.send("c-1", "crampon strap frayed");

    replace_atomically(&served, &std::fs::read(&m2).unwrap());
    svc.wait_metric(RELOADS, &[("target", "model"), ("result", "ok")], 1.0);
    let want2 = format!("{}+10", &sum(&m2)[..12]);
    let info = svc.model_info();
    assert_eq!(info["model_version"], want2.as_str(), "the new file, with the ten labels replayed on top: {info}");
    assert_eq!(info["file_version"], "next-2");
    svc.send("c-2", "crampon strap frayed");

    let out = svc.finish();
    assert_eq!(out["c-1"]["model_version"], want1.as_str());
    assert_eq!(out["c-2"]["model_version"], want2.as_str());
    assert_eq!(out["c-2"]["class"], "defects", "the replayed labels teach the new file the novel terms");
}
