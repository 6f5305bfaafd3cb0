//! `sieveline rules-test`: run a rules file over a labelled file and report per-rule fires, precision and class shares, conflicts and coverage (a table, or `--json`).

use std::path::Path;

use anyhow::{Context, Result};

use crate::cli::{InputArgs, RulesTestArgs};
use crate::error::DatasetError;
use crate::io::dataset::{self, Spec};
use crate::rules::report::{self, ReportBuilder, TestReport};
use crate::rules::{FieldText, MatchScratch, RecordTerms, RuleSet};
use crate::settings::Settings;
use crate::text::{Analyzer, AnalyzerScratch};

use super::rules_input::{load, row_texts, rules_path};
use super::{input_spec, Skipped};

pub fn run(mut settings: Settings, args: &RulesTestArgs) -> Result<()> {
    let spec = input_spec(&mut settings, &args.input, &args.io, true)?;
    let path = rules_path(&settings, args.rules.as_deref())?;
    let set = load(&settings, &path)?;
    let (rep, skipped) =
        test_file(&settings, &set, &args.input, &spec, &args.io, args.rule_classes_only, args.examples)?;
    if args.json {
        let mut v = serde_json::to_value(&rep)?;
        v["skipped_rows"] = skipped.total().into();
        println!("{}", serde_json::to_string_pretty(&v)?);
    } else {
        if args.rule_classes_only {
            println!("(only records labelled with a class some rule targets)");
        }
        print!("{}", report::table(&rep));
        println!("\n{} rows skipped ({})", skipped.total(), skipped.summary());
    }
    Ok(())
}

/// The report for one labelled file; `rule_classes_only` keeps records whose label a rule targets.
pub fn test_file(
    settings: &Settings,
    set: &RuleSet,
    input: &Path,
    spec: &Spec,
    io: &InputArgs,
    rule_classes_only: bool,
    examples: usize,
) -> Result<(TestReport, Skipped)> {
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let mut b = ReportBuilder::new(set, examples);
    let mut skipped = Skipped::default();
    let mut terms = RecordTerms::new();
    let mut asc = AnalyzerScratch::default();
    let mut ms = MatchScratch::default();
    for row in dataset::open(input, spec)? {
        let row = match row {
            Ok(r) => r,
            Err(e) => {
                if io.strict {
                    return Err(DatasetError::Strict { path: input.display().to_string(), error: e }.into());
                }
                skipped.add(&e);
                continue;
            }
        };
        let label = row.label.clone().unwrap_or_default();
        if rule_classes_only && set.classes().binary_search(&label).is_err() {
            continue;
        }
        let texts = row_texts(&row, spec);
        let fields: Vec<FieldText> =
            texts.iter().map(|(f, t, w)| FieldText { field: *f, text: t, weight: *w }).collect();
        terms.analyze(&analyzer, &fields, &mut asc);
        let fired = set.matches(&terms, &fields, &mut ms);
        let joined: Vec<&str> = texts.iter().map(|(_, t, _)| t.as_str()).collect();
        b.add(row.line, &label, &joined.join(" | "), fired);
    }
    Ok((b.finish(), skipped))
}
