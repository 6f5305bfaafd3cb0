//! The demo generator's only I/O: write each stream's records, ground truth, label events (complete and id-only), optional labelled training files, and the manifest.
//!
//! Files per stream `K` (`tickets` or `logs`), all JSON lines:
//! `K.jsonl`, `K.truth.jsonl`, `K.labels.jsonl`, `K.raw-labels.jsonl`, and
//! with `labelled`, `K.labelled.p1.jsonl` … `K.labelled.p3.jsonl` (the
//! record plus `class`, one file per phase). Plus `manifest.json`. Shapes in
//! `docs/demo.md`. Nothing written depends on the wall clock or the output
//! path, so the same seed gives byte-identical files.

use std::fs::{self, File};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use serde::Serialize;
use serde_json::{json, Map, Value};

use super::reviewers::{
    self, Label, CORRECTION_DELAY, CORRECTION_SHARE, LEAD, NEIGHBOUR_MISTAKE, REVIEWERS,
};
use super::script::PHASES;
use super::{Fields, Generated, Record, Stream, START_UNIX};

pub const MANIFEST: &str = "manifest.json";
pub const FORMAT_VERSION: u32 = 1;

/// A complete label event: what the learner folds.
#[derive(Debug, Serialize)]
pub struct CompleteEvent<'a> {
    pub id: &'a str,
    pub class: &'a str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub replaces: Option<&'a str>,
    pub fields: &'a Fields,
    pub at: usize,
    /// When the label is published: the timestamp of record `at`.
    pub ts: &'a str,
    pub reviewer: &'a str,
}

/// An id-only label event for the raw label topic.
#[derive(Debug, Serialize)]
pub struct RawEvent<'a> {
    pub id: &'a str,
    pub class: &'a str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub replaces: Option<&'a str>,
    pub at: usize,
}

/// A row of a labelled training file: the record and its true class.
#[derive(Debug, Serialize)]
struct LabelledRow<'a> {
    #[serde(flatten)]
    record: &'a Record,
    class: &'a str,
}

pub fn complete_event<'a>(s: &'a Stream, l: &'a Label) -> CompleteEvent<'a> {
    let r = &s.records[l.index];
    CompleteEvent {
        id: &r.id,
        class: l.class,
        replaces: l.replaces,
        fields: &r.fields,
        at: l.at,
        ts: &s.records[l.at].ts,
        reviewer: l.reviewer,
    }
}

pub fn raw_event<'a>(s: &'a Stream, l: &'a Label) -> RawEvent<'a> {
    RawEvent {
        id: &s.records[l.index].id,
        class: l.class,
        replaces: l.replaces,
        at: l.at,
    }
}

fn jsonl<T: Serialize>(path: &Path, rows: impl Iterator<Item = T>) -> std::io::Result<()> {
    let mut w = BufWriter::new(File::create(path)?);
    for row in rows {
        serde_json::to_writer(&mut w, &row)?;
        w.write_all(b"\n")?;
    }
    w.flush()
}

/// Per-stream counts for the manifest.
pub fn stream_summary(s: &Stream, files: &[String]) -> Value {
    let classes = s.kind.classes();
    let phases: Vec<Value> = (1..=3u8)
        .map(|p| {
            let range = s.bounds.range(p);
            let truth = &s.truth[range.clone()];
            let mut by_class = Map::new();
            for c in &classes {
                by_class.insert(c.to_string(), json!(truth.iter().filter(|t| t.class == *c).count()));
            }
            let mut tags = Map::new();
            for tag in ["safety", "new_line", "outage", "new_service", "ambiguous"] {
                let n = truth.iter().filter(|t| t.tags.contains(&tag)).count();
                if n > 0 {
                    tags.insert(tag.to_string(), json!(n));
                }
            }
            json!({ "phase": p, "start": range.start, "end": range.end, "records": range.len(), "classes": by_class, "tags": tags })
        })
        .collect();
    let first = s.labels.iter().filter(|l| l.replaces.is_none());
    let wrong = first
        .clone()
        .filter(|l| l.class != s.truth[l.index].class)
        .count();
    json!({
        "kind": s.kind.name(),
        "records": s.records.len(),
        "classes": classes,
        "boundaries": s.bounds,
        "phases": phases,
        "labels": {
            "events": s.labels.len(),
            "first_labels": first.count(),
            "wrong_first_labels": wrong,
            "corrections": s.labels.iter().filter(|l| l.replaces.is_some()).count(),
        },
        "files": files,
    })
}

/// The manifest: the seed, the script, the reviewers and every stream's summary.
pub fn manifest(g: &Generated, files: &[(String, Vec<String>)]) -> Value {
    let reviewers: Vec<Value> = REVIEWERS
        .iter()
        .map(|r| json!({ "name": reviewers::reviewer_name(r.name), "weight": r.weight, "error_rate": r.error_rate, "delay_min": r.delay.0, "delay_max": r.delay.1 }))
        .collect();
    let streams: Vec<Value> = g
        .streams
        .iter()
        .map(|s| {
            stream_summary(
                s,
                files
                    .iter()
                    .find(|(k, _)| k == s.kind.name())
                    .map_or(&[][..], |(_, f)| &f[..]),
            )
        })
        .collect();
    json!({
        "format": FORMAT_VERSION,
        "seed": g.config.seed,
        "records_per_stream": g.config.records,
        "start": crate::clock::rfc3339(START_UNIX),
        "phase2_at": g.config.phase2_at,
        "phase3_at": g.config.phase3_at,
        "phases": PHASES,
        "reviewers": reviewers,
        "lead": reviewers::reviewer_name(LEAD),
        "correction_share": CORRECTION_SHARE,
        "correction_delay_min": CORRECTION_DELAY.0,
        "correction_delay_max": CORRECTION_DELAY.1,
        "neighbour_mistake_share": NEIGHBOUR_MISTAKE,
        "expected_wrong_label_rate": reviewers::expected_error_rate(),
        "streams": streams,
    })
}

/// Write every stream of `g` into `dir` (created if missing); returns the paths written.
pub fn write_streams(g: &Generated, dir: &Path, labelled: bool) -> std::io::Result<Vec<PathBuf>> {
    fs::create_dir_all(dir)?;
    let mut written = Vec::new();
    let mut names = Vec::new();
    for s in &g.streams {
        let k = s.kind.name();
        let mut files = vec![
            format!("{k}.jsonl"),
            format!("{k}.truth.jsonl"),
            format!("{k}.labels.jsonl"),
            format!("{k}.raw-labels.jsonl"),
        ];
        jsonl(&dir.join(&files[0]), s.records.iter())?;
        jsonl(&dir.join(&files[1]), s.truth.iter())?;
        jsonl(
            &dir.join(&files[2]),
            s.labels.iter().map(|l| complete_event(s, l)),
        )?;
        jsonl(
            &dir.join(&files[3]),
            s.labels.iter().map(|l| raw_event(s, l)),
        )?;
        if labelled {
            for p in 1..=3u8 {
                let name = format!("{k}.labelled.p{p}.jsonl");
                let range = s.bounds.range(p);
                jsonl(
                    &dir.join(&name),
                    range.map(|i| LabelledRow {
                        record: &s.records[i],
                        class: s.truth[i].class,
                    }),
                )?;
                files.push(name);
            }
        }
        written.extend(files.iter().map(|f| dir.join(f)));
        names.push((k.to_string(), files));
    }
    let path = dir.join(MANIFEST);
    let mut text = serde_json::to_string_pretty(&manifest(g, &names))?;
    text.push('\n');
    fs::write(&path, text)?;
    written.push(path);
    Ok(written)
}
