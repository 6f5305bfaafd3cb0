//! `sieveline classify`: records from a file or stdin, one decision per line as JSON on stdout; bad rows reported on stderr with their line.

use std::io::Write;

use anyhow::{Context, Result};
use serde_json::{json, Value};

use crate::cli::ClassifyArgs;
use crate::decide::{decide_by_model, DecideScratch, ReviewPolicy};
use crate::error::DatasetError;
use crate::io::dataset;
use crate::model::snapshot;
use crate::settings::Settings;
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

use super::{input_spec, Skipped};

pub fn run(mut settings: Settings, args: &ClassifyArgs) -> Result<()> {
    let spec = input_spec(&mut settings, &args.input, &args.io, false)?;
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let loaded = snapshot::read(&args.model, Some(&settings.analyzer))?;
    let version = loaded.served_version();
    let model = loaded.model;
    let policy = ReviewPolicy::from_settings(&settings.review);
    let rows = dataset::open(&args.input, &spec)?;
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    let mut scratch = AnalyzerScratch::default();
    let mut ds = DecideScratch::default();
    let mut bag = TermBag::new();
    let mut skipped = Skipped::default();
    let mut n = 0u64;
    for row in rows {
        let row = match row {
            Ok(r) => r,
            Err(e) => {
                if args.io.strict {
                    return Err(DatasetError::Strict { path: args.input.display().to_string(), error: e }.into());
                }
                eprintln!("skipped {e}");
                skipped.add(&e);
                continue;
            }
        };
        analyzer.analyze_fields(row.fields.iter().map(|(t, w)| (t.as_str(), *w)), &mut scratch, &mut bag);
        let (decision, _) = decide_by_model(
            &model,
            &version,
            row.id.clone(),
            &bag,
            &policy,
            settings.model.explain_terms,
            &mut ds,
        );
        let mut v = serde_json::to_value(&decision)?;
        let obj = v.as_object_mut().expect("decision is an object");
        obj.insert("line".into(), json!(row.line));
        if args.scores {
            obj.insert("log_scores".into(), json!(ds.score.scores));
            let known: Vec<(String, f64)> = {
                let mut k = TermBag::new();
                for &(_, w, i) in &ds.score.hits {
                    k.push(bag.get(i as usize).0, w);
                }
                k.aggregated()
            };
            obj.insert("features".into(), json!(known));
        }
        if args.echo {
            obj.insert("record".into(), row.raw.unwrap_or(Value::Null));
        }
        serde_json::to_writer(&mut out, &v)?;
        out.write_all(b"\n")?;
        n += 1;
    }
    out.flush()?;
    eprintln!("classified {n} records; skipped {}: {}", skipped.total(), skipped.summary());
    Ok(())
}
