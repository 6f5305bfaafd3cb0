//! Shared helpers for the offline integration tests: the binary, the data folder, the reference venv.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_sieveline"))
}

/// The open datasets folder: $SIEVELINE_DATA_DIR, else ../shared/data beside the repo.
/// Missing data is a failure, never a silent skip.
pub fn data_dir() -> PathBuf {
    let dir = std::env::var_os("SIEVELINE_DATA_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/data"));
    assert!(
        dir.join("README.md").exists(),
        "open datasets not found at {} — set SIEVELINE_DATA_DIR or run scripts/fetch-data.sh",
        dir.display()
    );
    dir
}

pub fn data_file(rel: &str) -> PathBuf {
    let p = data_dir().join(rel);
    assert!(p.exists(), "dataset file {} is missing — run scripts/fetch-data.sh", p.display());
    p
}

/// The reference venv's python ($SIEVELINE_PYTHON, set by scripts/test.sh).
pub fn python() -> PathBuf {
    let p = std::env::var_os("SIEVELINE_PYTHON").map(PathBuf::from).unwrap_or_else(|| {
        Path::new(env!("CARGO_MANIFEST_DIR")).join(".venv-ref/bin/python")
    });
    assert!(p.exists(), "reference venv python not found at {} — run scripts/test.sh (it creates the venv)", p.display());
    p
}

/// Run the binary; panics with its stderr if it fails.
pub fn run_ok(args: &[&str]) -> Output {
    let out = Command::new(bin()).args(args).env_remove("SIEVELINE_CONFIG").output().expect("spawn sieveline");
    assert!(
        out.status.success(),
        "sieveline {args:?} failed ({}):\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Run the binary expecting failure; returns (exit code, stderr).
pub fn run_err(args: &[&str]) -> (i32, String) {
    let out = Command::new(bin()).args(args).env_remove("SIEVELINE_CONFIG").output().expect("spawn sieveline");
    assert!(!out.status.success(), "sieveline {args:?} unexpectedly succeeded");
    (out.status.code().unwrap_or(-1), String::from_utf8_lossy(&out.stderr).into_owned())
}

pub fn json_stdout(out: &Output) -> serde_json::Value {
    serde_json::from_slice(&out.stdout).expect("stdout is JSON")
}

/// Split the SMS Spam Collection by 0-based row index: `i % 5 == 4` is test.
pub fn sms_split(dir: &Path) -> (PathBuf, PathBuf) {
    let text = std::fs::read_to_string(data_file("sms-spam/SMSSpamCollection")).unwrap();
    let (mut train, mut test) = (String::new(), String::new());
    for (i, line) in text.lines().enumerate() {
        let dst = if i % 5 == 4 { &mut test } else { &mut train };
        dst.push_str(line);
        dst.push('\n');
    }
    let (a, b) = (dir.join("sms-train.tsv"), dir.join("sms-test.tsv"));
    std::fs::write(&a, train).unwrap();
    std::fs::write(&b, test).unwrap();
    (a, b)
}
