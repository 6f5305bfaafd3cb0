//! The service without a broker, and its settings.
//!
//! Index — what each test guards:
//! 9. `embedded_default_reads_a_file_or_stdin_and_writes_decisions_to_stdout` — `sieveline run` with no broker: one JSON line per record, dead letters for bad lines, exit 0.
//! - `librdkafka_properties_pass_through_settings_and_env` — dotted property names survive the settings file; the underscore form works from the environment; guarantee-bearing properties are refused.
//! - `non_loopback_admin_needs_a_token_for_everything_but_metrics_and_health` — refused without a token; with one, /model and /classify require `Authorization: Bearer` (RFC 6750), /metrics and /healthz do not.
//! - `missing_model_is_a_usage_error` — exit code 2 naming the setting.

use crate::common;

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::data::{self, train_model};
use common::{free_port, http, test_dir};
use sieveline::settings::{kafka_property_name, Settings};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_sieveline"))
}

#[test]
fn embedded_default_reads_a_file_or_stdin_and_writes_decisions_to_stdout() {
    let dir = test_dir("lines");
    let model = train_model(&dir);
    let inputs = data::stream(200, 10, Some(20), 11);
    let mut text = Vec::new();
    for i in &inputs {
        text.extend_from_slice(&i.payload);
        text.push(b'\n');
    }
    let file = dir.join("tickets.jsonl");
    std::fs::write(&file, &text).unwrap();
    let port = free_port().to_string();
    let admin = format!("127.0.0.1:{port}");

    let check = |stdout: &[u8], source: &str| {
        let lines: Vec<serde_json::Value> =
            stdout.split(|b| *b == b'\n').filter(|l| !l.is_empty()).map(|l| serde_json::from_slice(l).expect("JSON line")).collect();
        assert_eq!(lines.len(), 200, "one output per record");
        for (n, (line, input)) in lines.iter().zip(&inputs).enumerate() {
            match input.malformed {
                Some(kind) => {
                    let reason = data::MALFORMED.iter().find(|(k, _)| *k == kind).unwrap().1;
                    assert_eq!(line["kind"], "dead_letter", "line {n}");
                    assert_eq!(line["reason"], reason, "line {n}");
                    assert_eq!(line["source"]["offset"], n as i64);
                    assert_eq!(line["source"]["topic"], source);
                }
                None => {
                    assert!(line["kind"] == "decision" || line["kind"] == "review", "line {n}: {line}");
                    assert!(data::CLASSES.contains(&line["class"].as_str().unwrap()));
                    let original: serde_json::Value = serde_json::from_slice(&input.payload).unwrap();
                    assert_eq!(line["record"], original, "the original record rides along unchanged");
                    if line["kind"] == "decision" {
                        assert_eq!(line["destination"], format!("sieveline.routed.{}", line["class"].as_str().unwrap()));
                    }
                }
            }
        }
    };

    let out = bin()
        .args(["run", "--model"])
        .arg(&model)
        .arg("--input")
        .arg(&file)
        .env("SIEVELINE__ADMIN__BIND", &admin)
        .env("SIEVELINE__INPUT__MAX_RECORD_BYTES", data::MAX_RECORD_BYTES.to_string())
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    check(&out.stdout, &file.display().to_string());

    let mut child = bin()
        .args(["run", "--model"])
        .arg(&model)
        .env("SIEVELINE__ADMIN__BIND", &admin)
        .env("SIEVELINE__INPUT__MAX_RECORD_BYTES", data::MAX_RECORD_BYTES.to_string())
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child.stdin.take().unwrap().write_all(&text).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    check(&out.stdout, "stdin");
}

#[test]
fn librdkafka_properties_pass_through_settings_and_env() {
    let s = Settings::from_toml_str(
        "[kafka]\nproperties = { \"security.protocol\" = \"ssl\", \"sasl.mechanisms\" = \"PLAIN\" }\nproducer_properties = { \"linger.ms\" = \"20\" }\n",
    )
    .unwrap();
    assert_eq!(s.kafka.properties.get("security.protocol").map(String::as_str), Some("ssl"));
    assert_eq!(s.kafka.properties.get("sasl.mechanisms").map(String::as_str), Some("PLAIN"));
    assert_eq!(s.kafka.producer_properties.get("linger.ms").map(String::as_str), Some("20"));

    let env = vec![("SIEVELINE__KAFKA__PROPERTIES__SESSION_TIMEOUT_MS".to_string(), "6000".to_string())];
    let s = Settings::load_with_env(None, env).unwrap();
    let (k, v) = s.kafka.properties.iter().next().expect("one property from the environment");
    assert_eq!((kafka_property_name(k).as_str(), v.as_str()), ("session.timeout.ms", "6000"));

    let e = Settings::from_toml_str("[kafka]\nproperties = { \"enable.auto.offset.store\" = \"true\" }\n").unwrap_err().to_string();
    assert!(e.contains("enable.auto.offset.store"), "{e}");
    let e = Settings::from_toml_str("[kafka]\nproducer_properties = { \"enable.idempotence\" = \"false\" }\n").unwrap_err().to_string();
    assert!(e.contains("enable.idempotence"), "{e}");
    let e = Settings::from_toml_str("[routing]\ntopic_template = \"routed.{klass}\"\n").unwrap_err().to_string();
    assert!(e.contains("routing.topic_template"), "{e}");
}

#[test]
fn non_loopback_admin_needs_a_token_for_everything_but_metrics_and_health() {
    let dir = test_dir("token");
    let model = train_model(&dir);
    let port = free_port();
    let bind = format!("0.0.0.0:{port}");
    let out = bin().args(["run", "--model"]).arg(&model).env("SIEVELINE__ADMIN__BIND", &bind).stdin(Stdio::null()).output().unwrap();
    assert_eq!(out.status.code(), Some(2), "refused without a token");
    assert!(String::from_utf8_lossy(&out.stderr).contains("admin.token"));

    // With a token; stdin stays open so the service keeps running.
    let mut child = bin()
        .args(["run", "--model"])
        .arg(&model)
        .env("SIEVELINE__ADMIN__BIND", &bind)
        .env("SIEVELINE__ADMIN__TOKEN", "s3cret-test-token")
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let stdin = child.stdin.take().unwrap();
    common::wait_for(Duration::from_secs(20), "admin endpoint", || http(port, "GET", "/healthz", None, b"").filter(|r| r.0 == 200));
    assert_eq!(http(port, "GET", "/metrics", None, b"").unwrap().0, 200);
    assert_eq!(http(port, "GET", "/readyz", None, b"").unwrap().0, 200);
    assert_eq!(http(port, "GET", "/model", None, b"").unwrap().0, 401);
    assert_eq!(http(port, "GET", "/model", Some("wrong"), b"").unwrap().0, 401);
    assert_eq!(http(port, "POST", "/classify", None, br#"{"subject":"tent pole snapped"}"#).unwrap().0, 401);
    assert_eq!(http(port, "GET", "/model", Some("s3cret-test-token"), b"").unwrap().0, 200);
    let (st, body) = http(port, "POST", "/classify", Some("s3cret-test-token"), br#"{"subject":"tent pole snapped on first use"}"#).unwrap();
    assert_eq!(st, 200);
    assert!(body.contains("\"class\":\"defects\""), "{body}");
    drop(stdin); // end of input: the service drains and exits 0
    let st = child.wait().unwrap();
    assert!(st.success(), "{st}");
}

#[test]
fn missing_model_is_a_usage_error() {
    let out = bin().args(["run"]).env("SIEVELINE__ADMIN__BIND", "127.0.0.1:0").stdin(Stdio::null()).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("service.model"));
}
