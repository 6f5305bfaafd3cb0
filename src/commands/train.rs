//! `sieveline train`: a labelled file in, a model snapshot out, with a progress bar, a skip report and an optional count dump.

use std::io::Write;
use std::time::Instant;

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressStyle};
use serde_json::json;

use crate::cli::TrainArgs;
use crate::error::DatasetError;
use crate::features::Vocabulary;
use crate::io::dataset;
use crate::model::snapshot::{self, SnapshotMeta};
use crate::model::{Model, NbParams};
use crate::settings::Settings;
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

use super::{apply_model_args, input_spec, Skipped};

pub fn run(mut settings: Settings, args: &TrainArgs) -> Result<()> {
    apply_model_args(&mut settings, &args.model)?;
    if let Some(labels) = &args.labels {
        return train_from_labels(settings, args, labels);
    }
    let input = args.input.as_ref().expect("clap requires --input or --labels");
    let spec = input_spec(&mut settings, input, &args.io, true)?;
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let started = Instant::now();
    let rows = dataset::open(input, &spec)?;
    let m = &settings.model;
    let params = NbParams::from_settings(m);
    // Classes are added as first seen and sorted at the end, so one pass suffices.
    let mut model: Option<Model> = None;
    let mut scratch = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    let mut skipped = Skipped::default();
    let mut dump_rows: Vec<(String, Vec<(String, f64)>)> = Vec::new();
    let mut learned = 0u64;
    let mut dropped_terms = 0usize;
    let bar = ProgressBar::hidden();
    for row in rows {
        let row = match row {
            Ok(r) => r,
            Err(e) => {
                if args.io.strict {
                    return Err(DatasetError::Strict { path: input.display().to_string(), error: e }.into());
                }
                skipped.add(&e);
                continue;
            }
        };
        let label = row.label.expect("labelled spec");
        analyzer.analyze_fields(row.fields.iter().map(|(t, w)| (t.as_str(), *w)), &mut scratch, &mut bag);
        let mdl = match &mut model {
            Some(x) => x,
            None => {
                let vocab = Vocabulary::new(m.vocabulary, m.max_vocabulary, m.hash_buckets);
                // Counts do not depend on the parameters: build with the cheapest
                // cache and set the real parameters (checked then) at the end.
                let p = NbParams::multinomial(params.alpha);
                model.insert(Model::new(p, settings.analyzer.clone(), vec![label.clone()], vocab)?)
            }
        };
        if mdl.class_index(&label).is_none() {
            mdl.add_class(&label)?;
        }
        let out = mdl.learn(&bag, &label, 1.0)?;
        dropped_terms += out.dropped_terms;
        if args.dump_counts.is_some() {
            dump_rows.push((label, bag.aggregated()));
        }
        learned += 1;
        if learned == settings.train.progress_min_rows as u64 {
            bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
            bar.set_style(ProgressStyle::with_template("{spinner} {pos} rows  {per_sec}  {elapsed}").expect("template"));
        }
        if learned % 1024 == 0 {
            bar.set_position(learned);
        }
    }
    bar.finish_and_clear();
    let mut model = model.ok_or_else(|| DatasetError::Empty { path: input.display().to_string() })?;
    let mut classes = model.classes().to_vec();
    classes.sort();
    model.reorder_classes(&classes)?;
    model.set_params(params)?;
    let meta = SnapshotMeta::fresh(&model, args.model_version.clone());
    let checksum = snapshot::write(&args.out, &model, &meta)?;
    let secs = started.elapsed().as_secs_f64();
    eprintln!(
        "trained {learned} rows in {secs:.2}s ({:.0} rows/s); skipped {}: {}; {} classes; vocabulary {} terms{}",
        learned as f64 / secs.max(1e-9),
        skipped.total(),
        skipped.summary(),
        model.classes().len(),
        model.vocabulary_size(),
        if dropped_terms > 0 { format!(" ({dropped_terms} term occurrences dropped: vocabulary full)") } else { String::new() }
    );
    for e in &skipped.first {
        eprintln!("  skipped {e}");
    }
    eprintln!("wrote {} (version {}, checksum {})", args.out.display(), meta.model_version, &checksum[..16]);
    if let Some(path) = &args.dump_counts {
        write_dump(path, &model, &dump_rows)?;
    }
    Ok(())
}

/// Fold a file of complete label events, in order, with `Folder` — the same
/// code the service runs on its learned-label topic. Classes are the sorted
/// classes of the log (or only those of a starting point with --add-classes off).
fn train_from_labels(mut settings: Settings, args: &TrainArgs, path: &std::path::Path) -> Result<()> {
    use crate::learn::{FoldOutcome, Folder, UnknownClassPolicy};
    use std::io::BufRead;
    let _ = input_spec(&mut settings, path, &args.io, false)?;
    let started = Instant::now();
    let read = || -> Result<Vec<Vec<u8>>> {
        let f = std::fs::File::open(path).with_context(|| format!("open {}", path.display()))?;
        let mut lines = Vec::new();
        for l in std::io::BufReader::new(f).split(b'\n') {
            let l = l?;
            if !l.iter().all(u8::is_ascii_whitespace) {
                lines.push(l);
            }
        }
        Ok(lines)
    };
    let lines = read()?;
    let mut classes: Vec<String> = lines
        .iter()
        .filter_map(|l| crate::learn::LabelEvent::parse(l).ok())
        .flat_map(|e| std::iter::once(e.class).chain(e.replaces))
        .collect();
    classes.sort();
    classes.dedup();
    if classes.is_empty() {
        return Err(DatasetError::Empty { path: path.display().to_string() }.into());
    }
    let m = &settings.model;
    let model = Model::new(
        NbParams::from_settings(m),
        settings.analyzer.clone(),
        classes,
        Vocabulary::new(m.vocabulary, m.max_vocabulary, m.hash_buckets),
    )?;
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let policy = if args.add_classes { UnknownClassPolicy::Add } else { UnknownClassPolicy::Reject };
    let meta0 = SnapshotMeta { label_offsets: Default::default(), created_at: String::new(), model_version: String::new(), labels_learned: 0 };
    let mut folder = Folder::new(model, &meta0, analyzer, settings.input.fields.clone(), policy);
    let name = format!("file:{}", path.display());
    let mut rejected: std::collections::BTreeMap<&'static str, u64> = Default::default();
    let mut corrections = 0u64;
    for (i, l) in lines.iter().enumerate() {
        match folder.apply(&name, 0, i as i64, l) {
            FoldOutcome::Learned { corrected_from, .. } => corrections += u64::from(corrected_from.is_some()),
            FoldOutcome::Rejected(r) => {
                if args.io.strict {
                    anyhow::bail!("{}: line {}: {r} (--strict)", path.display(), i + 1);
                }
                if rejected.values().sum::<u64>() < 5 {
                    eprintln!("  refused line {}: {r}", i + 1);
                }
                *rejected.entry(r.reason()).or_default() += 1;
            }
            FoldOutcome::AlreadyFolded => {}
        }
    }
    let labels_learned = folder.labels_learned();
    let model = folder.into_model();
    // A file is not the label topic: the snapshot records no topic offsets, so a
    // service loading it folds its label topic from the start.
    let meta = SnapshotMeta { labels_learned, ..SnapshotMeta::fresh(&model, args.model_version.clone()) };
    let checksum = snapshot::write(&args.out, &model, &meta)?;
    eprintln!(
        "folded {labels_learned} label events ({corrections} corrections) in {:.2}s; refused {}: {:?}; {} classes; vocabulary {} terms",
        started.elapsed().as_secs_f64(),
        rejected.values().sum::<u64>(),
        rejected,
        model.classes().len(),
        model.vocabulary_size()
    );
    eprintln!("wrote {} (version {}, checksum {}, count fingerprint {})", args.out.display(), meta.model_version, &checksum[..16], model.fingerprint());
    Ok(())
}

/// The term-count matrix, in the model's column order, for reference checks:
/// `{"classes": [...], "vocabulary": [...], "rows": [{"y": i, "x": [[col, count], ...]}]}`.
fn write_dump(path: &std::path::Path, model: &Model, rows: &[(String, Vec<(String, f64)>)]) -> Result<()> {
    let vocab = model.vocabulary();
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).with_context(|| format!("create {}", path.display()))?);
    let terms: Vec<&str> = vocab.terms().collect();
    let mut out_rows = Vec::with_capacity(rows.len());
    for (label, feats) in rows {
        let y = model.class_index(label).expect("learned class");
        let x: Vec<(u32, f64)> = feats.iter().filter_map(|(t, w)| vocab.lookup(t).map(|id| (id, *w))).collect();
        out_rows.push(json!({"y": y, "x": x}));
    }
    let doc = json!({"classes": model.classes(), "vocabulary": terms, "rows": out_rows});
    serde_json::to_writer(&mut f, &doc)?;
    f.flush()?;
    Ok(())
}
