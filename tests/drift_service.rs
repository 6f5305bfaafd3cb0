//! Drift and health monitoring against the real service, a real Prometheus server and a real browser. Streams come from the demo generator (`sieveline generate`, the invented scenario of docs/demo.md): a model is trained on phase-1 log lines of one seed; the service reads phase-1 lines of another seed in their usual mix (timeouts about 18%), then, from the change point on, phase-1 lines re-mixed as in an outage (70% timeouts).
//!
//! Why not the generator's own outage phase: its new outage wording is mostly misread by a
//! phase-1 model as other failure kinds, so the predicted-class mix moves less (PSI about 0.14
//! here) while the unknown-token rate rises; docs/drift.md discusses watching both.
//!
//! Index — what each test guards:
//! - `prometheus_sees_psi_cross_its_alert_threshold_after_the_change_point` — Prometheus (Debian's
//!   `prometheus`) scrapes a running `sieveline run`; through its HTTP query API
//!   (`/api/v1/query_range`, Prometheus HTTP API v1) PSI stays below the alert threshold (0.25)
//!   before the change point and rises above it after; the real `alerts.yml` loads in the server.
//! - `status_page_in_headless_chromium_shows_live_numbers_that_agree_with_metrics` — the page at
//!   `/` in headless Chromium (Debian's `chromium`) shows numbers that change while the stream
//!   runs; its records-read and throughput agree with `/metrics` read at the same moment; a
//!   screenshot is kept under `SIEVELINE_TEST_OUTPUT/service/status-page-*/status-page.png`.
//! - `dashboard_references_only_metrics_the_service_exports` — every metric in
//!   `deploy/grafana/sieveline.json` is in a live `/metrics` (learning on, so the learner's
//!   test-then-train comparisons fill the feedback metrics), and every panel has a unit.
//! - `status_page_and_its_data_need_the_token_when_one_is_set` — `/` and `/status.json` answer
//!   401 without `Authorization: Bearer` (RFC 6750) when a token is set; `/metrics` does not.

use crate::common;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, Stdio};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use common::{free_port, http, test_dir, wait_for};

/// The alert threshold of `SievelineClassMixShiftMajor` in deploy/prometheus/alerts.yml.
const PSI_ALERT: f64 = 0.25;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_sieveline"))
}

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn run_ok(cmd: &mut Command) {
    let out = cmd.output().expect("run sieveline");
    assert!(out.status.success(), "{cmd:?} failed:\n{}", String::from_utf8_lossy(&out.stderr));
}

/// Demo log lines of one seed: the phase-1 lines in order, and the phase-1 lines re-mixed with 70% timeouts.
struct Phases {
    p1: Vec<String>,
    outage_mix: Vec<String>,
}

fn generate(dir: &Path, seed: u64, records: usize) -> PathBuf {
    let out = dir.join(format!("gen-{seed}"));
    run_ok(bin().args(["generate", "--seed", &seed.to_string(), "--records", &records.to_string(), "--kind", "logs", "--labelled", "--out"]).arg(&out));
    out
}

fn phases(gen: &Path) -> Phases {
    let lines: Vec<String> = std::fs::read_to_string(gen.join("logs.jsonl")).unwrap().lines().map(str::to_string).collect();
    let truth: Vec<serde_json::Value> = std::fs::read_to_string(gen.join("logs.truth.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(lines.len(), truth.len());
    let p1: Vec<(&String, bool)> =
        lines.iter().zip(&truth).filter(|(_, t)| t["phase"] == 1).map(|(l, t)| (l, t["class"] == "timeout")).collect();
    // The first 2000 in order; the rest re-mixed: 7 timeouts, then 3 others, repeated.
    let half = 2000.min(p1.len());
    let timeouts: Vec<&String> = p1[half..].iter().filter(|x| x.1).map(|x| x.0).collect();
    let others: Vec<&String> = p1[half..].iter().filter(|x| !x.1).map(|x| x.0).collect();
    let mut outage_mix = Vec::new();
    for k in 0..timeouts.len() / 7 {
        outage_mix.extend(timeouts[7 * k..7 * k + 7].iter().map(|l| l.to_string()));
        outage_mix.extend(others[3 * k..3 * k + 3].iter().map(|l| l.to_string()));
    }
    Phases { p1: p1[..half].iter().map(|x| x.0.clone()).collect(), outage_mix }
}

/// A model trained on the phase-1 log lines of seed 20 (text field, true classes).
fn train(dir: &Path) -> PathBuf {
    let gen = generate(dir, 20, 5000);
    let model = dir.join("logs-p1.svm");
    run_ok(bin().args(["train", "--field", "text", "--label-field", "class", "--input"]).arg(gen.join("logs.labelled.p1.jsonl")).arg("--out").arg(&model));
    model
}

/// `sieveline run` reading stdin, writing outputs to a file, admin on `port`.
struct Service {
    child: Child,
    stdin: Option<ChildStdin>,
    port: u16,
    log: PathBuf,
}

impl Service {
    fn start(dir: &Path, model: &Path, extra: &str) -> Service {
        let port = free_port();
        let cfg = dir.join("settings.toml");
        std::fs::write(
            &cfg,
            format!(
                r#"[service]
model = "{model}"

[source]
kind = "stdin"

[sink]
kind = "file"
path = "{out}"

[review]
min_confidence = 0.9

[drift]
window_records = 1000
min_records = 300
publish_every_records = 100
publish_interval_ms = 200

[status_page]
sample_interval_ms = 500
throughput_window_ms = 3000
refresh_ms = 500

[admin]
bind = "127.0.0.1:{port}"
{extra}
"#,
                model = model.display(),
                out = dir.join("outputs.jsonl").display(),
            ),
        )
        .unwrap();
        let log = dir.join("service.log");
        let logf = std::fs::File::create(&log).unwrap();
        let mut child = bin()
            .arg("--config")
            .arg(&cfg)
            .arg("run")
            .stdin(Stdio::piped())
            .stdout(logf.try_clone().unwrap())
            .stderr(logf)
            .spawn()
            .expect("spawn sieveline run");
        let stdin = child.stdin.take();
        let s = Service { child, stdin, port, log };
        wait_for(Duration::from_secs(30), "the admin endpoint", || match http(port, "GET", "/healthz", None, b"") {
            Some((200, _)) => Some(()),
            _ => None,
        });
        s
    }

    /// Write `lines` at about `per_second`, in batches every 50 ms.
    fn feed(&mut self, lines: &[String], per_second: usize) {
        let stdin = self.stdin.as_mut().expect("stdin open");
        let batch = (per_second / 20).max(1);
        let started = Instant::now();
        for (i, chunk) in lines.chunks(batch).enumerate() {
            let mut buf = String::new();
            for l in chunk {
                buf.push_str(l);
                buf.push('\n');
            }
            stdin.write_all(buf.as_bytes()).expect("write to the service");
            stdin.flush().unwrap();
            let due = started + Duration::from_millis(50 * (i as u64 + 1));
            if let Some(wait) = due.checked_duration_since(Instant::now()) {
                std::thread::sleep(wait);
            }
        }
    }

    fn metrics_text(&self) -> String {
        match http(self.port, "GET", "/metrics", None, b"") {
            Some((200, body)) => body,
            other => panic!("/metrics answered {other:?}; log:\n{}", std::fs::read_to_string(&self.log).unwrap_or_default()),
        }
    }

    /// The first sample named exactly `name` (no labels).
    fn sample(&self, name: &str) -> f64 {
        let text = self.metrics_text();
        text.lines()
            .find(|l| l.starts_with(name) && l[name.len()..].starts_with(' '))
            .and_then(|l| l.rsplit(' ').next()?.parse().ok())
            .unwrap_or_else(|| panic!("{name} is not in /metrics"))
    }

    /// Close stdin; the service drains and exits 0.
    fn finish(mut self) {
        drop(self.stdin.take());
        let deadline = Instant::now() + Duration::from_secs(30);
        loop {
            if let Some(st) = self.child.try_wait().unwrap() {
                assert!(st.success(), "service exited {st}; log:\n{}", std::fs::read_to_string(&self.log).unwrap_or_default());
                return;
            }
            assert!(Instant::now() < deadline, "service did not stop after its input ended");
            std::thread::sleep(Duration::from_millis(50));
        }
    }
}

impl Drop for Service {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

fn unix_now() -> f64 {
    SystemTime::now().duration_since(UNIX_EPOCH).unwrap().as_secs_f64()
}

/// A Prometheus server on loopback with temporary storage; killed on drop.
struct Prometheus {
    child: Child,
    port: u16,
}

impl Prometheus {
    fn start(dir: &Path, target_port: u16) -> Prometheus {
        let bin = ["/usr/bin/prometheus", "/usr/local/bin/prometheus"]
            .into_iter()
            .find(|p| Path::new(p).exists())
            .expect("prometheus is not installed: run scripts/install-deps.sh (it installs Debian's prometheus)");
        let port = free_port();
        let cfg = dir.join("prometheus.yml");
        std::fs::write(
            &cfg,
            format!(
                "global:\n  scrape_interval: 1s\n  evaluation_interval: 1s\nrule_files:\n  - {rules}\nscrape_configs:\n  - job_name: sieveline\n    scrape_interval: 1s\n    static_configs:\n      - targets: [\"127.0.0.1:{target_port}\"]\n",
                rules = root().join("deploy/prometheus/alerts.yml").display(),
            ),
        )
        .unwrap();
        let log = std::fs::File::create(dir.join("prometheus.log")).unwrap();
        let child = Command::new(bin)
            .arg(format!("--config.file={}", cfg.display()))
            .arg(format!("--storage.tsdb.path={}", dir.join("tsdb").display()))
            .arg(format!("--web.listen-address=127.0.0.1:{port}"))
            .stdout(log.try_clone().unwrap())
            .stderr(log)
            .spawn()
            .expect("start prometheus");
        let p = Prometheus { child, port };
        wait_for(Duration::from_secs(60), "Prometheus ready", || match http(port, "GET", "/-/ready", None, b"") {
            Some((200, _)) => Some(()),
            _ => None,
        });
        p
    }

    fn api(&self, path_and_query: &str) -> serde_json::Value {
        let (status, body) = http(self.port, "GET", path_and_query, None, b"").expect("Prometheus answers");
        assert_eq!(status, 200, "{path_and_query}: {body}");
        let v: serde_json::Value = serde_json::from_str(&body).expect("API answer is JSON");
        assert_eq!(v["status"], "success", "{v}");
        v["data"].clone()
    }

    /// Values of `query` between `start` and `end` (Unix seconds) at `step`; NaN kept as NaN.
    fn range(&self, query: &str, start: f64, end: f64, step: f64) -> Vec<(f64, f64)> {
        let d = self.api(&format!("/api/v1/query_range?query={query}&start={start:.3}&end={end:.3}&step={step}"));
        let series = d["result"].as_array().expect("a matrix");
        assert!(series.len() <= 1, "one series expected: {d}");
        series
            .first()
            .map(|s| {
                s["values"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|p| (p[0].as_f64().unwrap(), p[1].as_str().unwrap().parse::<f64>().unwrap()))
                    .collect()
            })
            .unwrap_or_default()
    }
}

impl Drop for Prometheus {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

#[test]
fn prometheus_sees_psi_cross_its_alert_threshold_after_the_change_point() {
    let dir = test_dir("drift-prometheus");
    let model = train(&dir);
    let stream = phases(&generate(&dir, 21, 20000));
    assert!(stream.p1.len() >= 2000 && stream.outage_mix.len() >= 1200, "{} / {}", stream.p1.len(), stream.outage_mix.len());
    let mut svc = Service::start(&dir, &model, "");
    let prom = Prometheus::start(&dir, svc.port);
    wait_for(Duration::from_secs(30), "Prometheus scraping sieveline", || {
        let d = prom.api("/api/v1/targets");
        d["activeTargets"].as_array()?.iter().any(|t| t["health"] == "up").then_some(())
    });
    let rules = prom.api("/api/v1/rules");
    let loaded: usize = rules["groups"].as_array().unwrap().iter().map(|g| g["rules"].as_array().unwrap().len()).sum();
    assert_eq!(loaded, 10, "the alert rules of deploy/prometheus/alerts.yml load in a real Prometheus");

    let t0 = unix_now();
    svc.feed(&stream.p1[..2000], 400);
    let t_change = unix_now();
    svc.feed(&stream.outage_mix[..1200], 400);
    let t_end = unix_now();
    // Let Prometheus scrape the last state a few times.
    std::thread::sleep(Duration::from_secs(3));
    let t_after = unix_now();

    let before = prom.range("sieveline_drift_class_mix_psi", t0, t_change, 0.5);
    let before: Vec<f64> = before.iter().map(|p| p.1).filter(|v| !v.is_nan()).collect();
    assert!(before.len() >= 4, "PSI was scraped before the change point: {before:?}");
    let max_before = before.iter().cloned().fold(f64::MIN, f64::max);
    assert!(max_before < PSI_ALERT, "PSI stays below {PSI_ALERT} before the change point: {before:?}");

    // 1000 phase-3 records fill the window: 2.5 s at 400/s, then some slack.
    let after = prom.range("sieveline_drift_class_mix_psi", t_change + 4.0, t_after, 0.5);
    let after: Vec<f64> = after.iter().map(|p| p.1).collect();
    assert!(!after.is_empty() && after.iter().all(|v| *v > PSI_ALERT), "PSI above {PSI_ALERT} after the change point: {after:?}");
    let last = *after.last().unwrap();
    println!(
        "PSI before the change point at most {max_before:.4}; after it {last:.4} (fed {:.1} s + {:.1} s)",
        t_change - t0,
        t_end - t_change
    );
    // The other drift gauges were scraped too.
    let oov = prom.range("sieveline_drift_unknown_token_ratio", t_change + 4.0, t_after, 1.0);
    assert!(oov.iter().all(|p| (0.0..=1.0).contains(&p.1)), "{oov:?}");
    svc.finish();
}

/// Read what the page shows, then /metrics at once.
struct Reading {
    page_records_in: f64,
    page_rate: f64,
    page_generated_ms: f64,
    metrics_records_in: f64,
    read_ms: f64,
}

fn read_page_and_metrics(b: &mut common::cdp::Browser, svc: &Service) -> Reading {
    let v = b.eval(
        "({r: document.getElementById('records-in').dataset.value, \
           rate: document.getElementById('records-per-second').dataset.value, \
           text: document.getElementById('records-per-second').textContent, \
           at: document.body.dataset.generatedAt})",
    );
    let metrics_records_in = svc.sample("sieveline_records_in_total");
    let read_ms = unix_now() * 1000.0;
    let num = |k: &str| v[k].as_str().and_then(|s| s.parse::<f64>().ok()).unwrap_or(f64::NAN);
    // The visible text is the same number, rounded to one decimal.
    let shown: f64 = v["text"].as_str().unwrap().parse().unwrap_or(f64::NAN);
    assert!((shown - num("rate")).abs() <= 0.051 || num("rate").is_nan(), "{v}");
    Reading { page_records_in: num("r"), page_rate: num("rate"), page_generated_ms: num("at"), metrics_records_in, read_ms }
}

#[test]
fn status_page_in_headless_chromium_shows_live_numbers_that_agree_with_metrics() {
    let dir = test_dir("status-page");
    let model = train(&dir);
    let stream = phases(&generate(&dir, 22, 20000));
    let mut svc = Service::start(&dir, &model, "");
    let port = svc.port;
    let lines: Vec<String> = stream.p1.iter().take(1200).chain(stream.outage_mix.iter().take(1200)).cloned().collect();
    let rate = 200usize;
    // Feed from a second thread while the browser reads the page.
    let mut stdin = svc.stdin.take().unwrap();
    let feeder = std::thread::spawn(move || {
        let started = Instant::now();
        for (i, chunk) in lines.chunks(rate / 20).enumerate() {
            let buf: String = chunk.iter().map(|l| format!("{l}\n")).collect();
            if stdin.write_all(buf.as_bytes()).is_err() {
                return stdin;
            }
            let due = started + Duration::from_millis(50 * (i as u64 + 1));
            if let Some(w) = due.checked_duration_since(Instant::now()) {
                std::thread::sleep(w);
            }
        }
        stdin
    });

    let mut b = common::cdp::Browser::start(&dir, 1280, 1700);
    b.navigate(&format!("http://127.0.0.1:{port}/"));
    // Wait until the page has rendered numbers with a throughput.
    wait_for(Duration::from_secs(20), "the page showing a throughput", || {
        let v = b.eval("(document.getElementById('records-per-second') || {dataset: {}}).dataset.value");
        v.as_str().and_then(|s| s.parse::<f64>().ok()).filter(|r| *r > 0.0)
    });
    std::thread::sleep(Duration::from_secs(4));
    let first = read_page_and_metrics(&mut b, &svc);
    std::thread::sleep(Duration::from_millis(2500));
    let second = read_page_and_metrics(&mut b, &svc);

    // Live: the numbers move while the stream runs.
    assert!(second.page_records_in > first.page_records_in, "records read did not change on the page");
    assert!(second.page_generated_ms > first.page_generated_ms, "the page did not refresh");
    for r in [&first, &second] {
        // Records read: the page's number is the counter at the time its data was generated,
        // /metrics is read after it; the gap is what arrived in between (at the feed rate).
        let gap_s = (r.read_ms - r.page_generated_ms) / 1000.0;
        let gap_records = r.metrics_records_in - r.page_records_in;
        assert!(gap_s >= 0.0 && gap_s < 2.0, "the page's data is {gap_s} s old");
        assert!(
            gap_records >= 0.0 && gap_records <= rate as f64 * (gap_s + 0.5) + 20.0,
            "page shows {} records read, /metrics {} ({gap_s:.2} s later)",
            r.page_records_in,
            r.metrics_records_in
        );
        // Throughput: the page's records/s against the rate of /metrics' counter between the two readings.
    }
    let metrics_rate = (second.metrics_records_in - first.metrics_records_in) / ((second.read_ms - first.read_ms) / 1000.0);
    for r in [&first, &second] {
        let rel = (r.page_rate - metrics_rate).abs() / metrics_rate;
        assert!(rel < 0.2, "page shows {:.1} records/s, /metrics gives {metrics_rate:.1} records/s", r.page_rate);
    }
    println!(
        "page throughput {:.1} and {:.1} records/s; /metrics {metrics_rate:.1} records/s; records read on the page {} then {}",
        first.page_rate, second.page_rate, first.page_records_in, second.page_records_in
    );

    // By now the outage part has started: let the window move, then keep a picture of the page.
    wait_for(Duration::from_secs(30), "PSI on the page above its threshold", || {
        let v = b.eval("document.getElementById('psi').dataset.value");
        v.as_str().and_then(|s| s.parse::<f64>().ok()).filter(|p| *p > PSI_ALERT)
    });
    std::thread::sleep(Duration::from_secs(1));
    let shown = b.eval(
        "({mix: document.querySelectorAll('#class-mix .bars').length, \
           reviews: document.querySelectorAll('#reviews tr').length, \
           firstReview: (document.querySelector('#reviews td.text') || {}).textContent || '', \
           indicators: document.querySelectorAll('#indicators tr').length, \
           act: document.querySelectorAll('#indicators .state.act').length})",
    );
    assert_eq!(shown["mix"], 7, "one class-mix row per class of the log model: {shown}");
    assert!(shown["reviews"].as_u64().unwrap() >= 1 && !shown["firstReview"].as_str().unwrap().is_empty(), "{shown}");
    assert!(shown["firstReview"].as_str().unwrap().chars().count() <= 161, "review text is truncated: {shown}");
    assert_eq!(shown["indicators"], 7, "{shown}");
    assert!(shown["act"].as_u64().unwrap() >= 1, "the PSI indicator is in its act state: {shown}");
    let png = b.screenshot_png();
    assert!(png.starts_with(b"\x89PNG\r\n\x1a\n") && png.len() > 20_000, "a real PNG ({} bytes)", png.len());
    let shot = dir.join("status-page.png");
    std::fs::write(&shot, &png).unwrap();
    println!("screenshot: {}", shot.display());
    drop(b);
    svc.stdin = Some(feeder.join().unwrap());
    svc.finish();
}

#[test]
fn dashboard_references_only_metrics_the_service_exports() {
    let dir = test_dir("dashboard");
    let model = train(&dir);
    let gen = generate(&dir, 23, 4000);
    let stream = phases(&gen);
    // Learning on, from the generator's label log: the learner compares each label with the
    // decision the model made before learning it, so the feedback metrics have values too.
    let learning = format!("\n[learning]\nenabled = true\nlabel_path = \"{}\"\n", gen.join("logs.labels.jsonl").display());
    let mut svc = Service::start(&dir, &model, &learning);
    svc.feed(&stream.p1[..600], 2000);
    wait_for(Duration::from_secs(20), "600 records read", || (svc.sample("sieveline_records_in_total") >= 600.0).then_some(()));
    std::thread::sleep(Duration::from_millis(500));
    let text = svc.metrics_text();
    let labels = common::parse_metrics_reference(&text);
    let compared = common::sample_sum(&labels, "sieveline_feedback_labels_total");
    assert!(compared >= 100.0, "labels compared with earlier decisions: {compared}");
    let accuracy = common::sample(&labels, "sieveline_feedback_accuracy_ratio", &[]);
    assert!(accuracy > 0.5 && accuracy <= 1.0, "feedback accuracy {accuracy}");
    let exported: std::collections::BTreeSet<&str> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
        .map(|l| l.split(['{', ' ']).next().unwrap())
        .collect();

    let dash: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(root().join("deploy/grafana/sieveline.json")).unwrap()).expect("dashboard JSON parses");
    let panels = dash["panels"].as_array().expect("panels");
    assert!(panels.len() >= 10, "{} panels", panels.len());
    let ident = regex::Regex::new(r"\bsieveline_[a-z0-9_]+").unwrap();
    let mut referenced = std::collections::BTreeSet::new();
    for p in panels {
        let title = p["title"].as_str().unwrap_or("?");
        let unit = p["fieldConfig"]["defaults"]["unit"].as_str().unwrap_or("");
        assert!(!unit.trim().is_empty(), "panel {title:?} has no unit");
        let targets = p["targets"].as_array().unwrap_or_else(|| panic!("panel {title:?} has no targets"));
        assert!(!targets.is_empty(), "panel {title:?} has no queries");
        for t in targets {
            for m in ident.find_iter(t["expr"].as_str().expect("a PromQL expression")) {
                referenced.insert(m.as_str().to_string());
            }
        }
    }
    let missing: Vec<&String> = referenced.iter().filter(|m| !exported.contains(m.as_str())).collect();
    assert!(missing.is_empty(), "the dashboard uses metrics /metrics does not have: {missing:?}");
    // The issue's panels: throughput, class mix, drift, review rate, feedback, change, freshness, lag, dead letters.
    for must in [
        "sieveline_records_in_total",
        "sieveline_drift_class_share_ratio",
        "sieveline_drift_class_mix_psi",
        "sieveline_drift_unknown_token_ratio",
        "sieveline_drift_review_ratio",
        "sieveline_feedback_accuracy_ratio",
        "sieveline_feedback_changes_detected_total",
        "sieveline_model_snapshot_age_seconds",
        "sieveline_consumer_lag_records",
        "sieveline_records_dead_lettered_total",
        "sieveline_model_loads_total",
        "sieveline_feedback_seconds_since_last_label",
    ] {
        assert!(referenced.contains(must), "no panel shows {must}");
    }
    println!("{} panels, {} metrics referenced, all exported; {compared} labels compared, feedback accuracy {accuracy:.3}", panels.len(), referenced.len());
    svc.finish();
}

#[test]
fn status_page_and_its_data_need_the_token_when_one_is_set() {
    let dir = test_dir("status-token");
    let model = train(&dir);
    let svc = Service::start(&dir, &model, "token = \"s3cret-for-tests\"");
    let port = svc.port;
    for path in ["/", "/status.json"] {
        let (status, _) = http(port, "GET", path, None, b"").unwrap();
        assert_eq!(status, 401, "{path} without a token");
        let (status, _) = http(port, "GET", path, Some("wrong"), b"").unwrap();
        assert_eq!(status, 401, "{path} with a wrong token");
    }
    let (status, body) = http(port, "GET", "/", Some("s3cret-for-tests"), b"").unwrap();
    assert_eq!(status, 200);
    assert!(body.contains("<html") && body.contains("status.json"), "the page");
    for external in ["<link", " src=", "@import", "url(", "https://"] {
        assert!(!body.contains(external), "no external assets: the page contains {external:?}");
    }
    let (status, body) = http(port, "GET", "/status.json", Some("s3cret-for-tests"), b"").unwrap();
    assert_eq!(status, 200);
    let v: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(v["thresholds"]["psi_major"], PSI_ALERT);
    assert_eq!(v["throughput"]["records_in"], 0);
    let (status, _) = http(port, "GET", "/metrics", None, b"").unwrap();
    assert_eq!(status, 200, "metrics stay open for the scraper");
    svc.finish();
}
