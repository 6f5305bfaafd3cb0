//! Shared helpers of the service integration tests: the broker address (required), topics, producing and collecting records, a trained test model, the service as a real process, the admin endpoint and the reference metrics parser.
#![allow(dead_code)]

pub mod cdp;
pub mod data;
pub mod kafka;
pub mod process;

use std::path::PathBuf;
use std::time::{Duration, Instant};

/// The broker list from `SIEVELINE_TEST_BROKERS`. Missing is a failure, never a skip.
pub fn brokers() -> String {
    match std::env::var("SIEVELINE_TEST_BROKERS") {
        Ok(b) if !b.trim().is_empty() => b,
        _ => panic!(
            "SIEVELINE_TEST_BROKERS is not set: these tests need a real Kafka broker. \
             Run scripts/test.sh (it starts one), or export SIEVELINE_TEST_BROKERS=host:port"
        ),
    }
}

/// A folder for this test's files, under `SIEVELINE_TEST_OUTPUT` when set (kept for failed runs).
pub fn test_dir(name: &str) -> PathBuf {
    let base = std::env::var_os("SIEVELINE_TEST_OUTPUT")
        .map(PathBuf::from)
        .unwrap_or_else(|| std::env::temp_dir().join("sieveline-test-output"));
    let dir = base.join("service").join(format!("{name}-{}", unique_suffix()));
    std::fs::create_dir_all(&dir).expect("create test dir");
    dir
}

/// Unique enough for topic and group names of concurrently running tests.
pub fn unique_suffix() -> String {
    use std::sync::atomic::{AtomicU32, Ordering};
    static N: AtomicU32 = AtomicU32::new(0);
    let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_micros();
    format!("{}-{}-{}", std::process::id(), nanos % 1_000_000_000, N.fetch_add(1, Ordering::Relaxed))
}

/// Poll `f` until it returns `Some` or `limit` passes.
pub fn wait_for<T>(limit: Duration, what: &str, mut f: impl FnMut() -> Option<T>) -> T {
    let deadline = Instant::now() + limit;
    loop {
        if let Some(v) = f() {
            return v;
        }
        if Instant::now() >= deadline {
            panic!("timed out after {limit:?} waiting for {what}");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
}

/// A free loopback TCP port (bound and released).
pub fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port()
}

/// Minimal HTTP/1.1 request to the admin endpoint: (status, body).
pub fn http(port: u16, method: &str, path: &str, token: Option<&str>, body: &[u8]) -> Option<(u16, String)> {
    use std::io::{Read, Write};
    let mut s = std::net::TcpStream::connect_timeout(&([127, 0, 0, 1], port).into(), Duration::from_secs(2)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(10))).ok()?;
    let auth = token.map(|t| format!("Authorization: Bearer {t}\r\n")).unwrap_or_default();
    let req = format!(
        "{method} {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n{auth}Content-Length: {}\r\n\r\n",
        body.len()
    );
    s.write_all(req.as_bytes()).ok()?;
    s.write_all(body).ok()?;
    let mut resp = Vec::new();
    s.read_to_end(&mut resp).ok()?;
    let text = String::from_utf8_lossy(&resp).into_owned();
    let status: u16 = text.split_whitespace().nth(1)?.parse().ok()?;
    let (head, rest) = text.split_once("\r\n\r\n")?;
    let body = if head.to_ascii_lowercase().contains("transfer-encoding: chunked") { dechunk(rest) } else { rest.to_string() };
    Some((status, body))
}

fn dechunk(mut s: &str) -> String {
    let mut out = String::new();
    while let Some((len, rest)) = s.split_once("\r\n") {
        let n = usize::from_str_radix(len.trim(), 16).unwrap_or(0);
        if n == 0 || rest.len() < n {
            break;
        }
        out.push_str(&rest[..n]);
        s = rest[n..].trim_start_matches("\r\n");
    }
    out
}

/// Parsed samples: name → [(labels, value)].
pub type Samples = std::collections::BTreeMap<String, Vec<(std::collections::BTreeMap<String, String>, f64)>>;

/// Parse Prometheus text with the exposition-format reference parser: Python
/// `prometheus_client.parser.text_string_to_metric_families`, from `$SIEVELINE_PYTHON`.
pub fn parse_metrics_reference(text: &str) -> Samples {
    use std::io::Write;
    let python = std::env::var("SIEVELINE_PYTHON").unwrap_or_else(|_| {
        panic!("SIEVELINE_PYTHON is not set: run scripts/test.sh (it builds the reference venv with prometheus_client)")
    });
    let script = r#"
import sys, json
from prometheus_client.parser import text_string_to_metric_families
out = {}
for fam in text_string_to_metric_families(sys.stdin.read()):
    for s in fam.samples:
        # NaN (a gauge with nothing to report yet) is not JSON: sent as null.
        out.setdefault(s.name, []).append([s.labels, s.value if s.value == s.value else None])
print(json.dumps(out))
"#;
    let mut child = std::process::Command::new(python)
        .args(["-c", script])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("run the reference parser");
    child.stdin.take().unwrap().write_all(text.as_bytes()).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "prometheus_client refused the exposition text: {}", String::from_utf8_lossy(&out.stderr));
    let raw: std::collections::BTreeMap<String, Vec<(std::collections::BTreeMap<String, String>, Option<f64>)>> =
        serde_json::from_slice(&out.stdout).expect("parser output is JSON");
    raw.into_iter().map(|(k, v)| (k, v.into_iter().map(|(l, x)| (l, x.unwrap_or(f64::NAN))).collect())).collect()
}

/// The value of one sample (labels must match exactly), 0 if absent.
pub fn sample(s: &Samples, name: &str, labels: &[(&str, &str)]) -> f64 {
    s.get(name)
        .and_then(|v| {
            v.iter().find(|(l, _)| l.len() == labels.len() && labels.iter().all(|(k, val)| l.get(*k).map(String::as_str) == Some(*val)))
        })
        .map(|(_, v)| *v)
        .unwrap_or(0.0)
}

/// Sum of every sample of `name`.
pub fn sample_sum(s: &Samples, name: &str) -> f64 {
    s.get(name).map(|v| v.iter().map(|(_, x)| x).sum()).unwrap_or(0.0)
}
