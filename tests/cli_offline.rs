//! The offline commands end to end: documented behaviour on bad input, model-file refusal
//! with exit code 4, analyzer-mismatch messages naming the setting, settings errors (exit 2), and the day-one empty model (`train --classes`).

use crate::support;

use std::path::Path;

use support::*;

const GOOD: &str = r#"{"id":"t1","subject":"Refund for order","body":"please refund my order 4711","label":"returns"}
{"id":"t2","subject":"Parcel late","body":"courier lost the parcel","label":"shipping"}
{"id":"t3","subject":"Return label","body":"need a return label for the tent","label":"returns"}
{"id":"t4","subject":"Where is my parcel","body":"tracking shows nothing since 2026-01-05","label":"shipping"}
"#;

fn write(dir: &Path, name: &str, text: &[u8]) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

fn train(dir: &Path, input: &str) -> String {
    let m = dir.join("m.svm").to_str().unwrap().to_string();
    run_ok(&["train", "--input", input, "--out", &m]);
    m
}

#[test]
fn malformed_rows_are_reported_with_line_numbers_and_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let mut data = GOOD.as_bytes().to_vec();
    data.extend_from_slice(b"{broken json\n");
    data.extend_from_slice(b"{\"id\":\"t6\",\"body\":\"no label\"}\n");
    data.extend_from_slice(b"{\"id\":\"t7\",\"body\":\"caf\xc3\x28\",\"label\":\"returns\"}\n");
    data.extend_from_slice(b"{\"id\":\"t8\",\"body\":\"   \",\"label\":\"returns\"}\n");
    data.extend_from_slice(b"{\"id\":\"t9\",\"note\":\"no text field\",\"label\":\"returns\"}\n");
    let input = write(dir.path(), "train.jsonl", &data);
    let m = dir.path().join("m.svm");
    let out = run_ok(&["train", "--input", &input, "--out", m.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("trained 4 rows"), "{err}");
    assert!(err.contains("skipped 5"), "{err}");
    for want in ["line 5: malformed JSON", "line 6: missing label", "line 7: not valid UTF-8", "line 8: the text is empty", "line 9: none of the text fields"] {
        assert!(err.contains(want), "missing {want:?} in:\n{err}");
    }
    // --strict makes the first malformed row fatal, with exit code 3.
    let (code, err) = run_err(&["train", "--input", &input, "--out", m.to_str().unwrap(), "--strict"]);
    assert_eq!(code, 3);
    assert!(err.contains("line 5"), "{err}");
}

#[test]
fn unknown_csv_field_is_fatal_and_lists_columns() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "t.csv", b"text,category\nhello there,a\n");
    let (code, err) = run_err(&["train", "--input", &input, "--out", "/dev/null", "--field", "message", "--label-field", "category"]);
    assert_eq!(code, 3);
    assert!(err.contains("unknown field") && err.contains("text, category"), "{err}");
}

#[test]
fn classify_writes_one_decision_per_record_and_reports_bad_lines() {
    let dir = tempfile::tempdir().unwrap();
    let m = train(dir.path(), &write(dir.path(), "train.jsonl", GOOD.as_bytes()));
    let input = write(dir.path(), "in.jsonl", b"{\"id\":\"a\",\"body\":\"refund please, wrong size\"}\n{oops\n{\"id\":\"b\",\"subject\":\"parcel\",\"body\":\"courier never came\"}\n");
    let out = run_ok(&["classify", "--model", &m, "--input", &input]);
    let lines: Vec<serde_json::Value> =
        String::from_utf8_lossy(&out.stdout).lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    assert_eq!(lines.len(), 2);
    assert_eq!(lines[0]["id"], "a");
    assert_eq!(lines[0]["class"], "returns");
    assert_eq!(lines[1]["class"], "shipping");
    assert_eq!(lines[0]["decided_by"], "model");
    let c = lines[0]["confidence"].as_f64().unwrap();
    assert!(c > 0.5 && c <= 1.0);
    assert!(lines[0]["margin"].as_f64().unwrap() > 0.0);
    assert_eq!(lines[0]["top_terms"][0]["term"], "refund");
    assert!(String::from_utf8_lossy(&out.stderr).contains("line 2: malformed JSON"));
}

#[test]
fn plain_text_lines_classify_too() {
    let dir = tempfile::tempdir().unwrap();
    let m = train(dir.path(), &write(dir.path(), "train.jsonl", GOOD.as_bytes()));
    let input = write(dir.path(), "in.log", b"courier lost parcel\nrefund order\n");
    let out = run_ok(&["classify", "--model", &m, "--input", &input, "--format", "text"]);
    let classes: Vec<String> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap()["class"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(classes, ["shipping", "returns"]);
}

#[test]
fn corrupt_truncated_and_foreign_model_files_are_refused_with_exit_4() {
    let dir = tempfile::tempdir().unwrap();
    let m = train(dir.path(), &write(dir.path(), "train.jsonl", GOOD.as_bytes()));
    let bytes = std::fs::read(&m).unwrap();
    let input = write(dir.path(), "in.jsonl", b"{\"body\":\"refund\"}\n");
    let truncated = write(dir.path(), "trunc.svm", &bytes[..bytes.len() / 2]);
    let mut flipped = bytes.clone();
    let n = flipped.len();
    flipped[n - 40] ^= 0xff;
    let corrupt = write(dir.path(), "corrupt.svm", &flipped);
    let foreign = write(dir.path(), "foreign.svm", b"#!/bin/sh\necho not a model\n");
    for (file, want) in [(&truncated, "truncated"), (&corrupt, "checksum mismatch"), (&foreign, "not a sieveline model file")] {
        let (code, err) = run_err(&["classify", "--model", file, "--input", &input]);
        assert_eq!(code, 4, "{err}");
        assert!(err.contains(want), "{file}: {err}");
    }
}

#[test]
fn model_with_other_analyzer_settings_is_refused_naming_the_setting() {
    let dir = tempfile::tempdir().unwrap();
    let m = train(dir.path(), &write(dir.path(), "train.jsonl", GOOD.as_bytes()));
    let cfg = write(dir.path(), "bigrams.toml", b"[analyzer]\nbigrams = true\n");
    let input = write(dir.path(), "in.jsonl", b"{\"body\":\"refund\"}\n");
    let (code, err) = run_err(&["--config", &cfg, "classify", "--model", &m, "--input", &input]);
    assert_eq!(code, 4);
    assert!(err.contains("analyzer.bigrams"), "{err}");
}

#[test]
fn settings_typo_and_bad_value_exit_2_naming_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "typo.toml", b"[model]\nalpah = 0.5\n");
    let (code, err) = run_err(&["--config", &cfg, "inspect", "--model", "x"]);
    assert_eq!(code, 2);
    assert!(err.contains("alpah"), "{err}");
    let cfg = write(dir.path(), "bad.toml", b"[review]\nmin_confidence = 1.5\n");
    let (code, err) = run_err(&["--config", &cfg, "inspect", "--model", "x"]);
    assert_eq!(code, 2);
    assert!(err.contains("review.min_confidence") && err.contains("1.5") && err.contains("from 0 to 1"), "{err}");
}

#[test]
fn inspect_shows_classes_counts_and_top_terms() {
    let dir = tempfile::tempdir().unwrap();
    let m = train(dir.path(), &write(dir.path(), "train.jsonl", GOOD.as_bytes()));
    let v = json_stdout(&run_ok(&["inspect", "--model", &m, "--json"]));
    assert_eq!(v["classes"][0]["class"], "returns");
    assert_eq!(v["classes"][0]["documents"], 2.0);
    assert_eq!(v["label_offsets"], serde_json::json!({}));
    assert!(v["vocabulary_size"].as_u64().unwrap() > 10);
    let top: Vec<&str> = v["classes"][0]["top_terms"].as_array().unwrap().iter().map(|t| t[0].as_str().unwrap()).collect();
    assert!(top.contains(&"refund") || top.contains(&"return"), "{top:?}");
}

#[test]
fn folding_a_label_log_with_corrections_equals_training_on_the_final_labels() {
    // A label log where one record is first labelled wrongly, then corrected with `replaces`.
    let dir = tempfile::tempdir().unwrap();
    let log = concat!(
        r#"{"id":"a","class":"returns","fields":{"subject":"Refund","body":"refund the boots"}}"#, "\n",
        r#"{"id":"b","class":"returns","fields":{"subject":"Parcel late","body":"courier lost it"}}"#, "\n",
        r#"{"id":"c","class":"shipping","fields":{"body":"tracking stuck since 2026-01-05"}}"#, "\n",
        r#"{"id":"b","class":"shipping","replaces":"returns","fields":{"subject":"Parcel late","body":"courier lost it"}}"#, "\n",
        r#"{"id":"d","class":"returns","replaces":"billing","fields":{"body":"never learned as billing"}}"#, "\n",
    );
    let labels = write(dir.path(), "labels.jsonl", log.as_bytes());
    let folded = dir.path().join("folded.svm");
    let out = run_ok(&["train", "--labels", &labels, "--out", folded.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("folded 4 label events (1 corrections)"), "{err}");
    assert!(err.contains("refused 1"), "the correction of something never learned is refused: {err}");
    let fp = |p: &Path| json_stdout(&run_ok(&["inspect", "--model", p.to_str().unwrap(), "--json"]))["count_fingerprint"].clone();
    // The label log has a "billing" class only in a refused correction; compare on the same classes.
    let folded_v = json_stdout(&run_ok(&["inspect", "--model", folded.to_str().unwrap(), "--json"]));
    let classes: Vec<&str> = folded_v["classes"].as_array().unwrap().iter().map(|c| c["class"].as_str().unwrap()).collect();
    assert_eq!(classes, ["billing", "returns", "shipping"]);
    // The same log without the wrong label and its correction: the right label learned once.
    let log2 = concat!(
        r#"{"id":"a","class":"returns","fields":{"subject":"Refund","body":"refund the boots"}}"#, "\n",
        r#"{"id":"b","class":"shipping","fields":{"subject":"Parcel late","body":"courier lost it"}}"#, "\n",
        r#"{"id":"c","class":"shipping","fields":{"body":"tracking stuck since 2026-01-05"}}"#, "\n",
        r#"{"id":"d","class":"returns","replaces":"billing","fields":{"body":"never learned as billing"}}"#, "\n",
    );
    let labels2 = write(dir.path(), "labels2.jsonl", log2.as_bytes());
    let direct = dir.path().join("direct.svm");
    run_ok(&["train", "--labels", &labels2, "--out", direct.to_str().unwrap()]);
    assert_eq!(fp(&folded), fp(&direct), "learn wrong + correct == learn right once");
}

#[test]
fn an_empty_model_of_named_classes_starts_day_one_and_folds_like_no_base() {
    let dir = tempfile::tempdir().unwrap();
    let empty = dir.path().join("empty.svm");
    run_ok(&["train", "--classes", "shipping,returns", "--out", empty.to_str().unwrap()]);
    let v = json_stdout(&run_ok(&["inspect", "--model", empty.to_str().unwrap(), "--json"]));
    let classes: Vec<&str> = v["classes"].as_array().unwrap().iter().map(|c| c["class"].as_str().unwrap()).collect();
    assert_eq!(classes, ["returns", "shipping"], "sorted, as every model's classes");
    assert!(v["classes"].as_array().unwrap().iter().all(|c| c["documents"] == 0.0), "{v}");
    assert_eq!(v["label_offsets"], serde_json::json!({}), "a service replays the whole label log on top");
    // Scoring with it sends every record to review: there is no model yet.
    let rec = write(dir.path(), "rec.jsonl", br#"{"id":"x","subject":"refund","body":"refund please"}"#);
    let d = json_stdout(&run_ok(&["classify", "--model", empty.to_str().unwrap(), "--input", &rec]));
    assert_eq!(d["review"], "no_model", "{d}");
    // Folding a label log on top of it gives the same counts as folding it onto nothing.
    let log = concat!(
        r#"{"id":"a","class":"returns","fields":{"subject":"Refund","body":"refund the boots"}}"#, "\n",
        r#"{"id":"b","class":"shipping","fields":{"subject":"Parcel late","body":"courier lost it"}}"#, "\n",
    );
    let labels = write(dir.path(), "labels.jsonl", log.as_bytes());
    let (on_empty, alone) = (dir.path().join("on-empty.svm"), dir.path().join("alone.svm"));
    run_ok(&["train", "--labels", &labels, "--base", empty.to_str().unwrap(), "--out", on_empty.to_str().unwrap()]);
    run_ok(&["train", "--labels", &labels, "--out", alone.to_str().unwrap()]);
    let fp = |p: &Path| json_stdout(&run_ok(&["inspect", "--model", p.to_str().unwrap(), "--json"]))["count_fingerprint"].clone();
    assert_eq!(fp(&on_empty), fp(&alone));
    // A class named twice, or an empty name, is a usage error (exit 2).
    for bad in ["returns,returns", "returns,,shipping"] {
        let (code, err) = run_err(&["train", "--classes", bad, "--out", dir.path().join("bad.svm").to_str().unwrap()]);
        assert_eq!(code, 2, "{bad}: {err}");
        assert!(err.contains("--classes"), "{bad}: {err}");
    }
}
