//! The Prometheus deploy assets checked with the real `promtool` (Debian's `prometheus` package).
//!
//! Index — what each test guards:
//! - `scrape_config_and_alert_rules_pass_promtool_check` — `promtool check config` on
//!   deploy/prometheus/prometheus.yml (which loads alerts.yml) and `promtool check rules`.
//! - `every_alert_fires_on_a_synthetic_series_and_stays_quiet_on_a_normal_one` —
//!   `promtool test rules deploy/prometheus/alerts.test.yml` passes, and that file has, for every
//!   alert of alerts.yml, a case where it fires and a case where it does not.
//! - `alert_thresholds_equal_the_status_page_thresholds` — the numbers in the alert expressions
//!   are the `[drift.thresholds]` defaults the status page shows beside each indicator.

use crate::support;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use sieveline::settings::Settings;

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("deploy/prometheus")
}

fn promtool(args: &[&str]) -> String {
    let bin = ["/usr/bin/promtool", "/usr/local/bin/promtool"]
        .into_iter()
        .find(|p| Path::new(p).exists())
        .expect("promtool is not installed: run scripts/install-deps.sh (it installs Debian's prometheus, which brings promtool)");
    let out = Command::new(bin).args(args).current_dir(dir()).output().expect("run promtool");
    let text = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "promtool {args:?} failed:\n{text}");
    text
}

/// A YAML file as JSON, read by PyYAML 6.0.4 from the reference venv.
fn yaml(path: &Path) -> serde_json::Value {
    let out = Command::new(support::python())
        .args(["-c", "import sys, json, yaml; print(json.dumps(yaml.safe_load(open(sys.argv[1]))))"])
        .arg(path)
        .output()
        .expect("run the reference python");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

/// alert name → (expression, for)
fn alerts() -> BTreeMap<String, String> {
    let doc = yaml(&dir().join("alerts.yml"));
    let mut out = BTreeMap::new();
    for g in doc["groups"].as_array().unwrap() {
        for r in g["rules"].as_array().unwrap() {
            let name = r["alert"].as_str().expect("only alerting rules").to_string();
            assert!(r["labels"]["severity"].is_string(), "{name} has a severity");
            assert!(r["annotations"]["runbook"].as_str().is_some_and(|s| s.starts_with("docs/drift.md#")), "{name} names its runbook section");
            out.insert(name, r["expr"].as_str().unwrap().to_string());
        }
    }
    out
}

#[test]
fn scrape_config_and_alert_rules_pass_promtool_check() {
    let text = promtool(&["check", "config", "prometheus.yml"]);
    assert!(text.contains("SUCCESS"), "{text}");
    let text = promtool(&["check", "rules", "alerts.yml"]);
    assert!(text.contains(&format!("SUCCESS: {} rules found", alerts().len())), "{text}");
}

#[test]
fn every_alert_fires_on_a_synthetic_series_and_stays_quiet_on_a_normal_one() {
    let text = promtool(&["test", "rules", "alerts.test.yml"]);
    assert!(text.contains("SUCCESS"), "{text}");
    let tests = yaml(&dir().join("alerts.test.yml"));
    let mut fires: BTreeMap<String, (usize, usize)> = BTreeMap::new();
    for t in tests["tests"].as_array().unwrap() {
        for c in t["alert_rule_test"].as_array().unwrap() {
            let e = fires.entry(c["alertname"].as_str().unwrap().to_string()).or_default();
            if c["exp_alerts"].as_array().is_some_and(|a| !a.is_empty()) {
                e.0 += 1;
            } else {
                e.1 += 1;
            }
        }
    }
    for name in alerts().keys() {
        let (firing, quiet) = fires.get(name).copied().unwrap_or_default();
        assert!(firing >= 1, "{name}: no case where it fires");
        assert!(quiet >= 1, "{name}: no case where it stays quiet");
    }
}

/// The number after `op` in `expr` following `metric`.
fn threshold(expr: &str, metric: &str, op: &str) -> f64 {
    let at = expr.find(metric).unwrap_or_else(|| panic!("{metric} not in {expr}")) + metric.len();
    let rest = expr[at..].trim_start();
    let rest = rest.strip_prefix(op).unwrap_or_else(|| panic!("{metric} is not followed by {op} in {expr}"));
    let num: String = rest.trim_start().chars().take_while(|c| c.is_ascii_digit() || *c == '.').collect();
    num.parse().unwrap()
}

#[test]
fn alert_thresholds_equal_the_status_page_thresholds() {
    let t = Settings::defaults().drift.thresholds;
    let a = alerts();
    assert_eq!(threshold(&a["SievelineClassMixShiftMajor"], "sieveline_drift_class_mix_psi", ">"), t.psi_major);
    assert_eq!(threshold(&a["SievelineClassMixShiftModerate"], "sieveline_drift_class_mix_psi", ">"), t.psi_moderate);
    let oov = &a["SievelineUnknownTermsSurge"];
    assert_eq!(threshold(oov, "sieveline_drift_unknown_token_ratio", ">"), t.oov_token_ratio);
    assert_eq!(threshold(oov, "sieveline_drift_mostly_unknown_record_ratio", ">"), t.oov_record_ratio);
    assert_eq!(threshold(&a["SievelineReviewRateHigh"], "sieveline_drift_review_ratio", ">"), t.review_ratio);
    let acc = &a["SievelineFeedbackAccuracyLow"];
    assert_eq!(threshold(acc, "sieveline_feedback_accuracy_ratio", "<"), t.feedback_accuracy);
    assert_eq!(threshold(acc, "sieveline_feedback_window_labels", ">="), t.feedback_min_labels as f64);
    // Common practice (from memory): PSI < 0.1 stable, 0.1–0.25 moderate, > 0.25 major.
    assert_eq!((t.psi_moderate, t.psi_major), (0.1, 0.25));
}
