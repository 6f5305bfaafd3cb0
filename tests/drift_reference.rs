//! Drift statistics checked against outside references.
//!
//! Index — what each test guards:
//! - `js_divergence_matches_scipy` — `drift::js_divergence_bits` equals
//!   `scipy.spatial.distance.jensenshannon(p, q, base=2)**2` (scipy 1.17.1, pinned in
//!   tests/reference/requirements.txt; scipy returns the distance, the square root of the
//!   divergence) on seeded random class mixes, with empty classes among them.
//! - `psi_matches_the_formula_evaluated_by_python` — `drift::psi` equals
//!   Σ (aᵢ − eᵢ) · ln(aᵢ / eᵢ) with the 1e-4 floor, evaluated independently with Python's `math`.

use crate::support;

use std::io::Write;
use std::process::{Command, Stdio};

use sieveline::drift::{js_divergence_bits, psi, DEFAULT_PSI_FLOOR};
use sieveline::eval::folds::SplitMix64;

/// Seeded class mixes (counts), 2 to 12 classes, about one class in five empty.
fn mixes(n: usize, seed: u64) -> Vec<(Vec<f64>, Vec<f64>)> {
    let mut rng = SplitMix64::new(seed);
    let mut draw = |k: usize| -> Vec<f64> {
        let v: Vec<f64> = (0..k).map(|_| if rng.below(5) == 0 { 0.0 } else { rng.below(1000) as f64 + 1.0 }).collect();
        if v.iter().sum::<f64>() == 0.0 {
            vec![1.0; k]
        } else {
            v
        }
    };
    (0..n)
        .map(|i| {
            let k = 2 + i % 11;
            (draw(k), draw(k))
        })
        .collect()
}

fn python(script: &str, input: &serde_json::Value) -> serde_json::Value {
    let mut child = Command::new(support::python())
        .args(["-c", script])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run the reference python");
    child.stdin.take().unwrap().write_all(input.to_string().as_bytes()).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "reference script failed: {}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("JSON from the reference script")
}

#[test]
fn js_divergence_matches_scipy() {
    let cases = mixes(200, 5);
    let script = r#"
import sys, json
import numpy as np
from scipy.spatial.distance import jensenshannon
cases = json.load(sys.stdin)
print(json.dumps([float(jensenshannon(np.array(p), np.array(q), base=2) ** 2) for p, q in cases]))
"#;
    let want = python(script, &serde_json::json!(cases));
    let want = want.as_array().unwrap();
    assert_eq!(want.len(), cases.len());
    let mut worst = 0.0f64;
    for ((p, q), w) in cases.iter().zip(want) {
        let got = js_divergence_bits(p, q).unwrap();
        let w = w.as_f64().unwrap();
        worst = worst.max((got - w).abs());
        assert!((got - w).abs() < 1e-9, "p {p:?} q {q:?}: ours {got}, scipy {w}");
    }
    // Identical mixes and disjoint ones: 0 and 1 bit, as scipy gives too.
    assert_eq!(js_divergence_bits(&[2.0, 0.0, 1.0], &[4.0, 0.0, 2.0]), Some(0.0));
    assert!((js_divergence_bits(&[1.0, 0.0], &[0.0, 3.0]).unwrap() - 1.0).abs() < 1e-15);
    println!("JS divergence: 200 seeded mixes agree with scipy to {worst:.1e}");
}

#[test]
fn psi_matches_the_formula_evaluated_by_python() {
    let cases = mixes(200, 9);
    let script = r#"
import sys, json, math
out = []
for a, e in json.load(sys.stdin):
    ta, te = sum(a), sum(e)
    s = 0.0
    for x, y in zip(a, e):
        x, y = max(x / ta, 1e-4), max(y / te, 1e-4)
        s += (x - y) * math.log(x / y)
    out.append(s)
print(json.dumps(out))
"#;
    let want = python(script, &serde_json::json!(cases));
    for ((a, e), w) in cases.iter().zip(want.as_array().unwrap()) {
        let got = psi(a, e, DEFAULT_PSI_FLOOR).unwrap();
        let w = w.as_f64().unwrap();
        assert!((got - w).abs() <= 1e-9 * w.abs().max(1.0), "a {a:?} e {e:?}: ours {got}, python {w}");
    }
}
