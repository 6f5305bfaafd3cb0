//! `sieveline demo` end to end: its claims recomputed from what it wrote (decisions, drift readings) and the generator's ground truth, never from its own summary figures.
//!
//! Index — what each test guards:
//! - `demo_claims_hold_on_its_own_output` — every record decided exactly once; in phase 1 the
//!   learned decisions beat the hand-written rules alone; the drift indicator rises within a
//!   bounded number of records after each phase change; after the new product line, accuracy
//!   comes back to within 5 points of the steady state once its labels arrive.

use crate::common;

use std::collections::HashMap;
use std::path::Path;
use std::process::Command;

use serde_json::Value;
use sieveline::decide::DecidedBy;
use sieveline::demo::{generate, DemoConfig, Kind, Record};
use sieveline::rules::{self, BlendScratch, Decider, FieldText};
use sieveline::settings::{BlendMode, Settings};
use sieveline::text::Analyzer;

/// The most records after a phase change before the drift indicator must have risen.
const DRIFT_BOUND: usize = 900;

fn read_jsonl(path: &Path) -> Vec<Value> {
    std::fs::read_to_string(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// The rules alone (no model), computed here from the committed rules file.
fn rules_alone(kind: Kind, records: &[Record]) -> Vec<Option<String>> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let name = kind.name();
    let mut s = Settings::load(Some(&root.join(format!("demo-stream/config-{name}.toml")))).unwrap();
    s.rules.blend = BlendMode::RulesOnly;
    let analyzer = Analyzer::new(&s.analyzer).unwrap();
    let set = rules::load(&root.join(format!("demo-stream/rules-{name}.toml")), &analyzer, &rules::field_names(&s)).unwrap();
    let decider = Decider::from_settings(&s);
    let mut scratch = BlendScratch::default();
    records
        .iter()
        .map(|r| {
            let v = serde_json::to_value(r).unwrap();
            let texts: Vec<(usize, String, f64)> = s
                .input
                .fields
                .iter()
                .enumerate()
                .filter_map(|(i, f)| v[&f.name].as_str().map(|t| (i, t.to_string(), f.weight)))
                .collect();
            let fields: Vec<FieldText> = texts.iter().map(|(i, t, w)| FieldText { field: *i, text: t, weight: *w }).collect();
            let d = decider.decide(&analyzer, Some(&set), None, "", None, &fields, &mut scratch);
            matches!(d.decided_by, DecidedBy::Rule(_)).then_some(d.class)
        })
        .collect()
}

fn accuracy(range: std::ops::Range<usize>, right: &[bool]) -> f64 {
    right[range.clone()].iter().filter(|r| **r).count() as f64 / range.len() as f64
}

#[test]
fn demo_claims_hold_on_its_own_output() {
    let dir = common::test_dir("demo-run");
    let out = Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .args(["demo", "--seed", "7", "--out"])
        .arg(&dir)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "demo failed:\n{stderr}");
    println!("{}", String::from_utf8_lossy(&out.stdout));

    // The ground truth comes from the generator itself, with the demo's default size.
    let g = generate(&DemoConfig::new(7, 6000, vec![Kind::Tickets, Kind::Logs]));
    for stream in &g.streams {
        let name = stream.kind.name();
        let lines = read_jsonl(&dir.join(format!("{name}.decisions.jsonl")));
        // Zero loss: every record has exactly one decision (or review); nothing else was written.
        let mut count: HashMap<&str, usize> = HashMap::new();
        let mut class: HashMap<&str, &str> = HashMap::new();
        for l in &lines {
            let kind = l["kind"].as_str().unwrap();
            assert!(kind == "decision" || kind == "review", "{name}: unexpected output {l}");
            let id = l["id"].as_str().unwrap();
            *count.entry(id).or_default() += 1;
            class.insert(id, l["class"].as_str().unwrap());
        }
        assert_eq!(lines.len(), stream.records.len(), "{name}: one output per record");
        assert!(stream.records.iter().all(|r| count.get(r.id.as_str()) == Some(&1)), "{name}: every record exactly once");

        let right: Vec<bool> = stream.truth.iter().map(|t| class[t.id.as_str()] == t.class).collect();
        let alone = rules_alone(stream.kind, &stream.records);
        let rules_right: Vec<bool> = alone.iter().zip(&stream.truth).map(|(c, t)| c.as_deref() == Some(t.class)).collect();
        let b = &stream.bounds;
        let (p1, p2) = (b.range(1), b.range(2));
        let learned_p1 = accuracy(p1.clone(), &right);
        let rules_p1 = accuracy(p1.clone(), &rules_right);
        let steady = accuracy(p1.start + p1.len() / 2..p1.end, &right);
        let p2_late = accuracy(p2.start + p2.len() / 2..p2.end, &right);
        let p2_early = accuracy(p2.start..p2.start + p2.len() / 4, &right);

        // Drift readings the demo took from the service's gauges while it ran.
        let summary: Value = serde_json::from_slice(&std::fs::read(dir.join(format!("{name}.summary.json"))).unwrap()).unwrap();
        let samples: Vec<(usize, bool)> = summary["drift_samples"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| (s["index"].as_u64().unwrap() as usize, s["flagged"].as_bool().unwrap()))
            .collect();
        let rise_after = |start: usize, end: usize| {
            samples.windows(2).find(|w| w[1].0 >= start && w[1].0 < end && w[1].1 && !w[0].1).map(|w| w[1].0 - start)
        };
        let d2 = rise_after(b.phase2_start, b.phase3_start);
        let d3 = rise_after(b.phase3_start, b.records);
        println!(
            "{name}: phase 1 learned {learned_p1:.3} vs rules alone {rules_p1:.3}; steady (2nd half of phase 1) {steady:.3}; \
             new line first quarter {p2_early:.3}, second half {p2_late:.3}; drift rose {d2:?} / {d3:?} records after phases 2 / 3"
        );
        assert!(learned_p1 > rules_p1, "{name}: learned accuracy in phase 1 ({learned_p1:.3}) beats the rules alone ({rules_p1:.3})");
        assert!(
            d2.is_some_and(|d| d <= DRIFT_BOUND) && d3.is_some_and(|d| d <= DRIFT_BOUND),
            "{name}: drift must rise within {DRIFT_BOUND} records of each change: {d2:?}, {d3:?}"
        );
        assert!(p2_late >= steady - 0.05, "{name}: after the new line's labels, accuracy {p2_late:.3} within 5 points of {steady:.3}");
    }
}
