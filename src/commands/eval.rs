//! `sieveline eval`: accuracy, macro-F1, per-class P/R/F1 and confusion on a test file, a holdout or k folds; with a grid, α (and kind) are tuned by k-fold on the training rows only.

use std::path::Path;

use anyhow::{bail, Context, Result};
use serde_json::json;

use crate::cli::EvalArgs;
use crate::error::DatasetError;
use crate::eval::cv::{choose, cross_validate, evaluate, train, Example, TuneMetric, VocabSpec};
use crate::eval::folds::{modulo_holdout, stratified_folds, stratified_holdout, FoldOrder};
use crate::eval::report::{confusion_table, metrics_table, tuning_table};
use crate::io::dataset::{self, Spec};
use crate::model::NbParams;
use crate::settings::Settings;
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

use super::{apply_model_args, input_spec, parse_kind, Skipped};

struct Labelled {
    bags: Vec<TermBag>,
    labels: Vec<String>,
    skipped: Skipped,
}

fn read_labelled(path: &Path, spec: &Spec, analyzer: &Analyzer, strict: bool) -> Result<Labelled> {
    let mut out = Labelled { bags: Vec::new(), labels: Vec::new(), skipped: Skipped::default() };
    let mut scratch = AnalyzerScratch::default();
    for row in dataset::open(path, spec)? {
        match row {
            Ok(r) => {
                let mut bag = TermBag::new();
                analyzer.analyze_fields(r.fields.iter().map(|(t, w)| (t.as_str(), *w)), &mut scratch, &mut bag);
                out.bags.push(bag);
                out.labels.push(r.label.expect("labelled spec"));
            }
            Err(e) if strict => return Err(DatasetError::Strict { path: path.display().to_string(), error: e }.into()),
            Err(e) => out.skipped.add(&e),
        }
    }
    if out.bags.is_empty() {
        return Err(DatasetError::Empty { path: path.display().to_string() }.into());
    }
    Ok(out)
}

pub fn run(mut settings: Settings, args: &EvalArgs) -> Result<()> {
    apply_model_args(&mut settings, &args.model)?;
    let spec = input_spec(&mut settings, &args.input, &args.io, true)?;
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let order = match args.fold_order.as_str() {
        "shuffled" => FoldOrder::Shuffled,
        "contiguous" => FoldOrder::Contiguous,
        o => bail!("--fold-order {o:?}: expected shuffled or contiguous"),
    };
    let metric = match args.tune_metric.as_str() {
        "accuracy" => TuneMetric::Accuracy,
        "macro_f1" => TuneMetric::MacroF1,
        m => bail!("--tune-metric {m:?}: expected accuracy or macro_f1"),
    };
    if args.folds < 2 {
        bail!("--folds {}: expected at least 2", args.folds);
    }
    let train_set = read_labelled(&args.input, &spec, &analyzer, args.io.strict)?;
    let test_set = match &args.test {
        Some(p) => {
            let tspec = Spec { format: args.io.format.as_deref().and_then(dataset::Format::parse).unwrap_or_else(|| dataset::Format::from_path(p)), ..spec.clone() };
            Some(read_labelled(p, &tspec, &analyzer, args.io.strict)?)
        }
        None => None,
    };
    let mut classes: Vec<String> = train_set.labels.iter().chain(test_set.iter().flat_map(|t| t.labels.iter())).cloned().collect();
    classes.sort();
    classes.dedup();
    let index = |l: &String| classes.binary_search(l).expect("collected");
    let mut examples: Vec<Example> =
        train_set.bags.into_iter().zip(&train_set.labels).map(|(bag, l)| Example { bag, label: index(l) }).collect();
    // Which examples are for testing.
    let mut is_test = vec![false; examples.len()];
    let mode;
    if let Some(t) = test_set {
        mode = format!("test file {}", args.test.as_ref().unwrap().display());
        let n0 = examples.len();
        examples.extend(t.bags.into_iter().zip(&t.labels).map(|(bag, l)| Example { bag, label: index(l) }));
        is_test.extend(std::iter::repeat_n(true, examples.len() - n0));
    } else if let Some(f) = args.holdout {
        if !(f > 0.0 && f < 1.0) {
            bail!("--holdout {f}: expected a fraction between 0 and 1");
        }
        mode = format!("stratified holdout {f} (seed {})", args.seed);
        let labels: Vec<usize> = examples.iter().map(|e| e.label).collect();
        is_test = stratified_holdout(&labels, f, args.seed);
    } else if let Some(nr) = &args.holdout_rows {
        let (n, r) = nr
            .split_once(':')
            .and_then(|(n, r)| Some((n.parse::<usize>().ok()?, r.parse::<usize>().ok()?)))
            .filter(|(n, r)| *n >= 2 && r < n)
            .with_context(|| format!("--holdout-rows {nr:?}: expected N:R with N >= 2 and R < N"))?;
        mode = format!("rows with index % {n} == {r} held out");
        is_test = modulo_holdout(examples.len(), n, r);
    } else {
        mode = format!("{}-fold cross-validation ({:?} folds, seed {})", args.folds, order, args.seed).to_lowercase();
    }
    let train_idx: Vec<usize> = (0..examples.len()).filter(|&i| !is_test[i]).collect();
    let test_idx: Vec<usize> = (0..examples.len()).filter(|&i| is_test[i]).collect();
    let vocab = VocabSpec { kind: settings.model.vocabulary, max: settings.model.max_vocabulary, buckets: settings.model.hash_buckets };
    let base = NbParams::from_settings(&settings.model);

    // Cross-validation runs on the training rows only.
    let train_examples: Vec<Example> = train_idx.iter().map(|&i| examples[i].clone()).collect();
    let train_labels: Vec<usize> = train_examples.iter().map(|e| e.label).collect();
    let folds = stratified_folds(&train_labels, args.folds, args.seed, order);

    let mut tuning = None;
    let mut params = base.clone();
    if !args.alpha_grid.is_empty() || !args.kind_grid.is_empty() {
        let kinds = if args.kind_grid.is_empty() { vec![base.kind] } else { args.kind_grid.iter().map(|k| parse_kind(k)).collect::<Result<_>>()? };
        let alphas = if args.alpha_grid.is_empty() { vec![base.alpha] } else { args.alpha_grid.clone() };
        let mut cands = Vec::new();
        for k in &kinds {
            for a in &alphas {
                let mut s = settings.clone();
                s.model.alpha = *a;
                s.validate().with_context(|| format!("--alpha-grid value {a}"))?;
                cands.push(NbParams { kind: *k, alpha: *a, ..base.clone() });
            }
        }
        let results = cross_validate(&train_examples, &classes, &folds, args.folds, &cands, &settings.analyzer, vocab);
        let best = choose(&results, metric);
        params = cands[best].clone();
        tuning = Some((results, best));
    }

    let (metrics, evaluated_on) = if test_idx.is_empty() {
        let r = cross_validate(&train_examples, &classes, &folds, args.folds, std::slice::from_ref(&params), &settings.analyzer, vocab);
        (r[0].pooled.metrics(&classes), "pooled held-out folds".to_string())
    } else {
        let model = train(&examples, train_idx.iter().copied(), &classes, &params, &settings.analyzer, vocab);
        (evaluate(&model, &examples, test_idx.iter().copied()).metrics(&classes), "test rows".to_string())
    };

    if args.json {
        let tuning_json = tuning.as_ref().map(|(r, b)| {
            json!({
                "folds": args.folds, "fold_order": args.fold_order, "seed": args.seed, "metric": metric,
                "candidates": r, "chosen": {"kind": r[*b].kind, "alpha": r[*b].alpha},
            })
        });
        let doc = json!({
            "mode": mode,
            "evaluated_on": evaluated_on,
            "params": params,
            "train_rows": train_idx.len(),
            "test_rows": test_idx.len(),
            "skipped_rows": train_set.skipped.total(),
            "tuning": tuning_json,
            "metrics": metrics,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
    } else {
        println!("evaluation: {mode}; {} training rows, {} test rows; {} rows skipped ({})", train_idx.len(), test_idx.len(), train_set.skipped.total(), train_set.skipped.summary());
        if let Some((r, b)) = &tuning {
            println!("\ntuning by {}-fold cross-validation on the training rows ({} folds, seed {}, by {}):", args.folds, args.fold_order, args.seed, args.tune_metric);
            print!("{}", tuning_table(r, *b));
        }
        println!("\nmodel: {:?}, alpha {}, priors {:?}; metrics on {evaluated_on}:\n", params.kind, params.alpha, params.priors);
        print!("{}", metrics_table(&metrics));
        println!("\nconfusion (rows true, columns predicted):");
        print!("{}", confusion_table(&metrics));
    }
    Ok(())
}
