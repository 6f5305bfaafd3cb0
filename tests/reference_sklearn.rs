//! Agreement with an outside reference library: scikit-learn 1.9.1's MultinomialNB and
//! ComplementNB(norm=False), run from the test venv, on the term-count matrix sieveline exports.
//!
//! Guards: joint log likelihoods within 1e-9 relative and 100% identical predictions, for
//! α ∈ {1.0, 0.1}, learned and uniform priors (multinomial), and the complement model.
//! Data: the SMS Spam Collection (Almeida, Gómez Hidalgo and Yamakami, DocEng 2011), split
//! by row index i % 5 == 4.

use crate::support;

use std::process::Command;

use support::*;

fn check(kind: &str, alpha: &str, priors: &str) {
    let dir = tempfile::tempdir().unwrap();
    let (train, test) = sms_split(dir.path());
    let model = dir.path().join("m.svm");
    let dump = dir.path().join("dump.json");
    run_ok(&[
        "train", "--input", train.to_str().unwrap(), "--format", "tsv", "--no-header", "--label-field", "0",
        "--field", "1", "--kind", kind, "--alpha", alpha, "--priors", priors,
        "--out", model.to_str().unwrap(), "--dump-counts", dump.to_str().unwrap(),
    ]);
    let out = run_ok(&[
        "classify", "--model", model.to_str().unwrap(), "--input", test.to_str().unwrap(), "--format", "tsv",
        "--no-header", "--field", "1", "--scores",
    ]);
    let decisions = dir.path().join("decisions.jsonl");
    std::fs::write(&decisions, &out.stdout).unwrap();
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/nb_check.py");
    let r = Command::new(python())
        .args([script, "--dump", dump.to_str().unwrap(), "--decisions", decisions.to_str().unwrap()])
        .args(["--kind", kind, "--alpha", alpha, "--priors", priors])
        .output()
        .expect("run reference");
    assert!(r.status.success(), "reference failed: {}", String::from_utf8_lossy(&r.stderr));
    let v: serde_json::Value = serde_json::from_slice(&r.stdout).unwrap();
    println!("{kind} alpha={alpha} priors={priors}: {v}");
    assert_eq!(v["n_test"], 1114);
    let rel = v["max_rel_err"].as_f64().unwrap();
    assert!(rel <= 1e-9, "{kind} α={alpha} {priors}: max relative error {rel:e} > 1e-9");
    assert_eq!(v["agreement"].as_f64().unwrap(), 1.0, "{kind} α={alpha} {priors}: predictions differ");
}

#[test]
fn multinomial_alpha_1_learned_priors_matches_sklearn() {
    check("multinomial", "1.0", "learned");
}

#[test]
fn multinomial_alpha_01_learned_priors_matches_sklearn() {
    check("multinomial", "0.1", "learned");
}

#[test]
fn multinomial_alpha_1_uniform_priors_matches_sklearn() {
    check("multinomial", "1.0", "uniform");
}

#[test]
fn multinomial_alpha_01_uniform_priors_matches_sklearn() {
    check("multinomial", "0.1", "uniform");
}

#[test]
fn complement_alpha_1_matches_sklearn() {
    check("complement", "1.0", "learned");
}

#[test]
fn complement_alpha_01_matches_sklearn() {
    check("complement", "0.1", "learned");
}
