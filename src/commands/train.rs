//! `sieveline train`: a labelled file in, a model snapshot out, with a progress bar, a skip report and an optional count dump.

use std::io::Write;
use std::time::Instant;

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressStyle};
use serde_json::json;

use crate::cli::TrainArgs;
use crate::error::{DatasetError, SettingsError};
use crate::features::Vocabulary;
use crate::io::dataset;
use crate::model::snapshot::{self, SnapshotMeta};
use crate::model::{Model, NbParams};
use crate::settings::Settings;
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

use super::{apply_model_args, input_spec, Skipped};

/// `train --classes`: an empty model of the named classes, recording no label-log offsets
/// (a service that loads it folds the whole label log on top).
fn empty_model(settings: &Settings, classes: &[String], args: &TrainArgs) -> Result<()> {
    let bad = |why: &str| SettingsError::Invalid { key: "--classes".into(), value: classes.join(","), allowed: why.into() };
    let mut names: Vec<String> = classes.iter().map(|c| c.trim().to_string()).collect();
    if names.is_empty() || names.iter().any(String::is_empty) {
        return Err(bad("one or more non-empty class names").into());
    }
    names.sort();
    if names.windows(2).any(|w| w[0] == w[1]) {
        return Err(bad("each class named once").into());
    }
    let model = Model::from_settings(settings, names)?;
    let meta = SnapshotMeta::fresh(&model, args.model_version.clone());
    let checksum = snapshot::write(&args.out, &model, &meta)?;
    eprintln!(
        "wrote {} (empty model of {} classes, version {}, checksum {})",
        args.out.display(),
        model.classes().len(),
        meta.model_version,
        &checksum[..16]
    );
    Ok(())
}

pub fn run(mut settings: Settings, args: &TrainArgs) -> Result<()> {
    apply_model_args(&mut settings, &args.model)?;
    if args.labels.is_some() || args.from_topic.is_some() {
        return super::train_log::run(settings, args);
    }
    if let Some(classes) = &args.classes {
        return empty_model(&settings, classes, args);
    }
    let label_offsets = super::train_log::offsets_at_train_time(&settings, &args.label_offsets)?;
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
                let vocab = Vocabulary::from_settings(m);
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
    let meta = SnapshotMeta { label_offsets, ..SnapshotMeta::fresh(&model, args.model_version.clone()) };
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
