//! `train --labels FILE` and `train --from-topic`: fold a label log into a model with the service's own folder and reader (on an empty model with the log's classes, or on top of a base file), and the label-log offsets a model trained from a labelled file records.

use std::collections::BTreeMap;
use std::path::Path;
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};

use crate::cli::TrainArgs;
use crate::error::DatasetError;
use crate::io::kafka::label_log::{end_offsets, KafkaLabelLog};
use crate::io::label_file::FileLabelLog;
use crate::learn::{FoldOutcome, Folder, LabelEvent, UnknownClassPolicy};
use crate::model::snapshot::{self, LabelOffsets, SnapshotMeta};
use crate::model::Model;
use crate::runtime::label_log::{LabelLog, LogEvent, LabelMsg};
use crate::settings::Settings;
use crate::text::Analyzer;

use super::input_spec;

/// Give up when a log makes no progress for this long.
const STALL_LIMIT: Duration = Duration::from_secs(60);

pub fn run(mut settings: Settings, args: &TrainArgs) -> Result<()> {
    let _ = input_spec(&mut settings, Path::new("labels.jsonl"), &args.io, false)?;
    let started = Instant::now();
    let mut log: Box<dyn LabelLog> = match (&args.labels, &args.from_topic) {
        (Some(p), _) => Box::new(FileLabelLog::new(p)),
        (None, Some(topic)) => {
            if !topic.is_empty() {
                settings.learning.label_topic = topic.clone();
            }
            Box::new(KafkaLabelLog::new(&settings).with_context(|| format!("read {}", settings.learning.label_topic))?)
        }
        (None, None) => unreachable!("clap requires --labels or --from-topic here"),
    };
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let (model, meta0, lineage) = match &args.base {
        Some(b) => {
            let l = snapshot::read(b, Some(&settings.analyzer))?;
            let (base, base_labels) = l.meta.lineage(&l.checksum);
            let lineage = (base.to_string(), base_labels);
            (l.model, l.meta, Some(lineage))
        }
        None => {
            let classes = log_classes(log.as_mut())?;
            if classes.is_empty() {
                return Err(DatasetError::Empty { path: log.describe() }.into());
            }
            let model = Model::from_settings(&settings, classes)?;
            (model, SnapshotMeta::default(), None)
        }
    };
    let policy = if args.add_classes { UnknownClassPolicy::Add } else { UnknownClassPolicy::Reject };
    let mut folder = Folder::new(model, &meta0, analyzer, settings.input.fields.clone(), policy);
    let labels_before = folder.labels_learned();
    log.seek(folder.offsets())?;
    let mut rejected: BTreeMap<&'static str, u64> = BTreeMap::new();
    let mut corrections = 0u64;
    let mut refusal: Option<String> = None;
    read_to_end(log.as_mut(), |m| {
        if refusal.is_some() {
            return;
        }
        match folder.apply(&m.topic, m.partition, m.offset, &m.payload) {
            FoldOutcome::Learned { corrected_from, .. } => corrections += u64::from(corrected_from.is_some()),
            FoldOutcome::Rejected(r) => {
                let at = format!("{}/{}@{}", m.topic, m.partition, m.offset);
                if args.io.strict {
                    refusal = Some(format!("{at}: {r} (--strict)"));
                    return;
                }
                if rejected.values().sum::<u64>() < 5 {
                    eprintln!("  refused {at}: {r}");
                }
                *rejected.entry(r.reason()).or_default() += 1;
            }
            FoldOutcome::AlreadyFolded => {}
        }
    })?;
    if let Some(r) = refusal {
        bail!(r);
    }
    let labels_learned = folder.labels_learned();
    let offsets = folder.offsets().clone();
    let model = folder.into_model();
    let mut meta = SnapshotMeta { labels_learned, label_offsets: offsets, ..SnapshotMeta::fresh(&model, args.model_version.clone()) };
    if let Some((base, base_labels)) = lineage {
        meta.base = base;
        meta.base_labels = base_labels;
    }
    let checksum = snapshot::write(&args.out, &model, &meta)?;
    eprintln!(
        "folded {} label events ({corrections} corrections) from {} in {:.2}s; refused {}: {:?}; {} classes; vocabulary {} terms",
        labels_learned - labels_before,
        log.describe(),
        started.elapsed().as_secs_f64(),
        rejected.values().sum::<u64>(),
        rejected,
        model.classes().len(),
        model.vocabulary_size()
    );
    eprintln!(
        "wrote {} (version {}, checksum {}, count fingerprint {})",
        args.out.display(),
        meta.model_version,
        &checksum[..16],
        model.fingerprint()
    );
    Ok(())
}

/// Read every partition of `log` to its current end, handing each event to `f`.
pub fn read_to_end(log: &mut dyn LabelLog, mut f: impl FnMut(LabelMsg)) -> Result<()> {
    let mut open: std::collections::BTreeSet<(String, i32)> = log.partitions().into_iter().collect();
    let mut last_progress = Instant::now();
    while !open.is_empty() {
        match log.poll(Duration::from_millis(200))? {
            LogEvent::Message(m) => {
                last_progress = Instant::now();
                f(m);
            }
            LogEvent::End { topic, partition } => {
                last_progress = Instant::now();
                open.remove(&(topic, partition));
            }
            LogEvent::Idle => {
                if last_progress.elapsed() > STALL_LIMIT {
                    bail!("{}: no progress for {STALL_LIMIT:?}, {} partitions not read to their end", log.describe(), open.len());
                }
            }
        }
    }
    Ok(())
}

/// The sorted classes a log names (as classes or as replaced classes).
fn log_classes(log: &mut dyn LabelLog) -> Result<Vec<String>> {
    log.seek(&LabelOffsets::new())?;
    let mut classes = std::collections::BTreeSet::new();
    read_to_end(log, |m| {
        if let Ok(e) = LabelEvent::parse(&m.payload) {
            classes.insert(e.class);
            classes.extend(e.replaces);
        }
    })?;
    Ok(classes.into_iter().collect())
}

/// The label-log offsets a model trained from a labelled file records:
/// none (`beginning`: a service folds the whole log on top of it), or the
/// log's current end (`end`: the training file already holds those labels).
/// The log is `learning.label_path` when set, else the learned-label topic.
pub fn offsets_at_train_time(settings: &Settings, mode: &str) -> Result<LabelOffsets> {
    match mode {
        "beginning" => Ok(LabelOffsets::new()),
        "end" if !settings.learning.label_path.is_empty() => {
            let mut log = FileLabelLog::new(Path::new(&settings.learning.label_path));
            let mut next = BTreeMap::new();
            read_to_end(&mut log, |m| {
                next.insert(m.partition, m.offset + 1);
            })?;
            let topic = log.partitions()[0].0.clone();
            Ok(if next.is_empty() { LabelOffsets::new() } else { LabelOffsets::from([(topic, next)]) })
        }
        "end" => Ok(end_offsets(settings).with_context(|| format!("the end of {}", settings.learning.label_topic))?),
        other => bail!("--label-offsets {other:?}: expected beginning or end"),
    }
}
