//! The service as a real process: a settings file per test, the release binary spawned with its log in the test folder, readiness, metrics, SIGTERM and SIGKILL.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::time::{Duration, Instant};

use super::{free_port, http, parse_metrics_reference, wait_for, Samples};

/// The topics and group of one test scenario.
#[derive(Debug, Clone)]
pub struct Scenario {
    pub brokers: String,
    pub input: String,
    pub input_partitions: i32,
    pub prefix: String,
    pub group: String,
    pub model: PathBuf,
    pub dir: PathBuf,
    /// Extra TOML appended to the settings (sections not written below).
    pub extra: String,
    pub max_in_flight: usize,
    pub commit_interval_ms: u64,
    pub drain_timeout_ms: u64,
}

impl Scenario {
    pub fn new(name: &str, brokers: &str, model: &Path, dir: &Path, input_partitions: i32) -> Scenario {
        let u = super::unique_suffix();
        Scenario {
            brokers: brokers.to_string(),
            input: format!("{name}.in.{u}"),
            input_partitions,
            prefix: format!("{name}.{u}"),
            group: format!("{name}-group-{u}"),
            model: model.to_path_buf(),
            dir: dir.to_path_buf(),
            extra: String::new(),
            max_in_flight: 200,
            commit_interval_ms: 500,
            drain_timeout_ms: 5000,
        }
    }

    pub fn class_topic(&self, class: &str) -> String {
        format!("{}.routed.{class}", self.prefix)
    }
    pub fn review_topic(&self) -> String {
        format!("{}.review", self.prefix)
    }
    pub fn dead_topic(&self) -> String {
        format!("{}.dead", self.prefix)
    }

    /// Output topics (class topics for `classes`, review, dead letters) with 2 partitions each.
    pub fn output_topics(&self, classes: &[&str]) -> Vec<(String, i32)> {
        let mut v: Vec<(String, i32)> = classes.iter().map(|c| (self.class_topic(c), 2)).collect();
        v.push((self.review_topic(), 2));
        v.push((self.dead_topic(), 2));
        v
    }

    /// Create the input topic and the outputs for `classes`.
    pub fn create_topics(&self, classes: &[&str]) -> Vec<(String, i32)> {
        let outs = self.output_topics(classes);
        let mut all: Vec<(&str, i32)> = outs.iter().map(|(t, p)| (t.as_str(), *p)).collect();
        all.push((&self.input, self.input_partitions));
        super::kafka::create_topics(&self.brokers, &all);
        outs
    }

    /// Write the settings file for an instance on admin `port`.
    pub fn settings_file(&self, port: u16, tag: &str) -> PathBuf {
        let text = format!(
            r#"[input]
max_record_bytes = {max}

[review]
min_confidence = 0.9

[service]
model = "{model}"
drain_timeout_ms = {drain}

[source]
kind = "kafka"
codec = "json"
topics = ["{input}"]

[sink]
kind = "kafka"

[kafka]
bootstrap_servers = "{brokers}"
group_id = "{group}"
properties = {{ "session.timeout.ms" = "6000", "heartbeat.interval.ms" = "500", "reconnect.backoff.max.ms" = "1000" }}

[routing]
topic_template = "{prefix}.routed.{{class}}"
review_topic = "{prefix}.review"

[dead_letter]
topic = "{prefix}.dead"

[delivery]
max_in_flight_per_partition = {inflight}
commit_interval_ms = {commit}

[admin]
bind = "127.0.0.1:{port}"
{extra}
"#,
            max = super::data::MAX_RECORD_BYTES,
            model = self.model.display(),
            drain = self.drain_timeout_ms,
            input = self.input,
            brokers = self.brokers,
            group = self.group,
            prefix = self.prefix,
            inflight = self.max_in_flight,
            commit = self.commit_interval_ms,
            extra = self.extra,
        );
        let path = self.dir.join(format!("settings-{tag}.toml"));
        std::fs::write(&path, text).unwrap();
        path
    }

    /// Start an instance; `tag` names its settings and log files.
    pub fn start(&self, tag: &str) -> ServiceProc {
        let port = free_port();
        let cfg = self.settings_file(port, tag);
        ServiceProc::spawn(&cfg, port, &self.dir.join(format!("service-{tag}.log")), None)
    }
}

/// A running `sieveline run` process; killed on drop.
pub struct ServiceProc {
    pub child: Child,
    pub port: u16,
    pub log: PathBuf,
    pub token: Option<String>,
    exited: Option<ExitStatus>,
}

impl ServiceProc {
    pub fn spawn(config: &Path, port: u16, log: &Path, token: Option<String>) -> ServiceProc {
        let logf = std::fs::OpenOptions::new().create(true).append(true).open(log).unwrap();
        let child = Command::new(env!("CARGO_BIN_EXE_sieveline"))
            .arg("--config")
            .arg(config)
            .arg("run")
            .env("SIEVELINE_LOG", "info,rdkafka=warn")
            .stdin(Stdio::null())
            .stdout(logf.try_clone().unwrap())
            .stderr(logf)
            .spawn()
            .expect("spawn sieveline run");
        ServiceProc { child, port, log: log.to_path_buf(), token, exited: None }
    }

    pub fn pid(&self) -> u32 {
        self.child.id()
    }

    pub fn log_text(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap_or_default()
    }

    /// Wait until `/readyz` answers 200.
    pub fn wait_ready(&mut self, limit: Duration) {
        let port = self.port;
        let deadline = Instant::now() + limit;
        loop {
            if let Some((200, _)) = http(port, "GET", "/readyz", None, b"") {
                return;
            }
            if let Ok(Some(st)) = self.child.try_wait() {
                panic!("service exited ({st}) before it was ready; log {}:\n{}", self.log.display(), self.log_text());
            }
            if Instant::now() >= deadline {
                panic!("service not ready after {limit:?}; log {}:\n{}", self.log.display(), self.log_text());
            }
            std::thread::sleep(Duration::from_millis(100));
        }
    }

    pub fn metrics_text(&self) -> Option<String> {
        match http(self.port, "GET", "/metrics", None, b"") {
            Some((200, body)) => Some(body),
            _ => None,
        }
    }

    /// `/metrics` parsed by the exposition-format reference parser.
    pub fn metrics(&self) -> Option<Samples> {
        self.metrics_text().map(|t| parse_metrics_reference(&t))
    }

    /// A counter read cheaply (no reference parser): the first sample line named `name`.
    pub fn counter(&self, name: &str) -> Option<f64> {
        let text = self.metrics_text()?;
        text.lines().find(|l| l.starts_with(name) && l[name.len()..].starts_with(' ')).and_then(|l| l.rsplit(' ').next()?.parse().ok())
    }

    pub fn wait_counter_at_least(&self, name: &str, n: f64, limit: Duration) {
        wait_for(limit, &format!("{name} >= {n}"), || self.counter(name).filter(|v| *v >= n).map(|_| ()));
    }

    pub fn signal(&self, sig: &str) {
        let st = Command::new("kill").arg(format!("-{sig}")).arg(self.pid().to_string()).status().unwrap();
        assert!(st.success(), "kill -{sig} failed");
    }

    /// SIGKILL and reap.
    pub fn kill9(&mut self) {
        if self.exited.is_none() {
            let _ = self.child.kill();
            self.exited = self.child.wait().ok();
        }
    }

    /// Wait for exit up to `limit`.
    pub fn wait_exit(&mut self, limit: Duration) -> Option<ExitStatus> {
        let deadline = Instant::now() + limit;
        loop {
            if let Ok(Some(st)) = self.child.try_wait() {
                self.exited = Some(st);
                return Some(st);
            }
            if Instant::now() >= deadline {
                return None;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    }
}

impl Drop for ServiceProc {
    fn drop(&mut self) {
        if self.exited.is_none() {
            if let Ok(None) = self.child.try_wait() {
                let _ = self.child.kill();
            }
            let _ = self.child.wait();
        }
    }
}
