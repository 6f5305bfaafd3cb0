//! `sieveline rules-curve`: the cold-start learning curve on two labelled files — model only against each blend, after n labels per class, on the rules' classes.

use std::path::Path;

use anyhow::{bail, Context, Result};

use crate::cli::{InputArgs, RulesCurveArgs};
use crate::error::DatasetError;
use crate::io::dataset::{self, Spec};
use crate::rules::curve::{self, Contender, Curve, Doc};
use crate::rules::{FieldText, RecordTerms, RuleSet};
use crate::settings::{BlendMode, Settings};
use crate::text::{Analyzer, AnalyzerScratch};

use super::input_spec;
use super::rules_input::{load, row_texts, rules_path};

/// Every blend beside model only, in the order the table shows them.
pub const CONTENDERS: [Contender; 5] = [
    Contender::ModelOnly,
    Contender::Blend(BlendMode::RulesOnly),
    Contender::Blend(BlendMode::RulesFirst),
    Contender::Blend(BlendMode::ModelFirst),
    Contender::Blend(BlendMode::Takeover),
];

pub fn run(mut settings: Settings, args: &RulesCurveArgs) -> Result<()> {
    let spec = input_spec(&mut settings, &args.input, &args.io, true)?;
    let path = rules_path(&settings, args.rules.as_deref())?;
    let set = load(&settings, &path)?;
    let labels = parse_labels(&args.labels)?;
    if args.seeds == 0 {
        bail!("--seeds 0: expected at least one seed");
    }
    let seeds: Vec<u64> = (0..args.seeds).map(|i| args.seed + i).collect();
    let c = compute(&settings, &set, &args.input, &args.test, &spec, &args.io, &labels, &seeds)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&c)?);
    } else {
        println!(
            "learning curve on {} classes ({}), {} test records, seeds {:?}, takeover at {} labels",
            c.classes.len(),
            c.classes.join(", "),
            c.test_records,
            c.seeds,
            c.takeover_labels
        );
        println!("mean macro-F1 over seeds (min–max); an undecided record counts as a miss\n");
        print!("{}", curve::table(&c));
    }
    Ok(())
}

/// `0,5,20,100,all` → `[Some(0), Some(5), Some(20), Some(100), None]`.
pub fn parse_labels(v: &[String]) -> Result<Vec<Option<usize>>> {
    v.iter()
        .map(|s| match s.trim() {
            "all" => Ok(None),
            n => n.parse::<usize>().map(Some).with_context(|| format!("--labels {n:?}: expected a number or \"all\"")),
        })
        .collect()
}

/// Read both files, keep the records of the rules' classes, and run the curve.
#[allow(clippy::too_many_arguments)]
pub fn compute(
    settings: &Settings,
    set: &RuleSet,
    train: &Path,
    test: &Path,
    spec: &Spec,
    io: &InputArgs,
    labels: &[Option<usize>],
    seeds: &[u64],
) -> Result<Curve> {
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let classes = set.classes().to_vec();
    let train_docs = read_docs(&analyzer, set, train, spec, io)?;
    let test_spec = Spec {
        format: io
            .format
            .as_deref()
            .and_then(dataset::Format::parse)
            .unwrap_or_else(|| dataset::Format::from_path(test)),
        ..spec.clone()
    };
    let test_docs = read_docs(&analyzer, set, test, &test_spec, io)?;
    for (c, name) in classes.iter().enumerate() {
        let n_train = train_docs.iter().filter(|d| d.label == c).count();
        let n_test = test_docs.iter().filter(|d| d.label == c).count();
        if n_train == 0 || n_test == 0 {
            bail!("class {name:?}, targeted by the rules, has {n_train} training and {n_test} test records; the curve needs both");
        }
    }
    Ok(curve::run(settings, set, &classes, &train_docs, &test_docs, labels, seeds, &CONTENDERS))
}

fn read_docs(analyzer: &Analyzer, set: &RuleSet, path: &Path, spec: &Spec, io: &InputArgs) -> Result<Vec<Doc>> {
    let mut docs = Vec::new();
    let mut asc = AnalyzerScratch::default();
    for row in dataset::open(path, spec)? {
        let row = match row {
            Ok(r) => r,
            Err(e) if io.strict => {
                return Err(DatasetError::Strict { path: path.display().to_string(), error: e }.into())
            }
            Err(_) => continue,
        };
        let Some(label) = row.label.as_ref().and_then(|l| set.classes().binary_search(l).ok()) else { continue };
        let texts = row_texts(&row, spec);
        let fields: Vec<FieldText> =
            texts.iter().map(|(f, t, w)| FieldText { field: *f, text: t, weight: *w }).collect();
        let mut terms = RecordTerms::new();
        terms.analyze(analyzer, &fields, &mut asc);
        docs.push(Doc { terms, texts, label });
    }
    Ok(docs)
}
