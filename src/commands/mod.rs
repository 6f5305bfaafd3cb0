//! Subcommands, one file each, plus the flag-over-settings helpers they share.

pub mod bench_stream;
pub mod classify;
pub mod demo;
pub mod eval;
pub mod explain;
pub mod generate;
pub mod inspect;
pub mod rules_check;
pub mod rules_curve;
pub mod rules_input;
pub mod rules_test;
pub mod run;
pub mod train;
pub mod train_log;

use std::path::Path;

use anyhow::{bail, Context, Result};

use crate::cli::{InputArgs, ModelArgs};
use crate::error::RowError;
use crate::io::dataset::{Format, Spec};
use crate::settings::{FieldSetting, ModelKind, PriorKind, Settings};

/// Apply input flags to settings (re-validated) and build the reading spec.
pub fn input_spec(settings: &mut Settings, path: &Path, a: &InputArgs, labelled: bool) -> Result<Spec> {
    if !a.fields.is_empty() {
        settings.input.fields = a.fields.iter().map(|f| parse_field(f)).collect::<Result<_>>()?;
    }
    if let Some(l) = &a.label_field {
        settings.input.label_field = l.clone();
    }
    if let Some(i) = &a.id_field {
        settings.input.id_field = i.clone();
    }
    settings.validate().context("flags give invalid settings")?;
    let format = match &a.format {
        Some(f) => Format::parse(f).with_context(|| format!("--format {f:?}: expected jsonl, csv, tsv or text"))?,
        None => Format::from_path(path),
    };
    Ok(Spec {
        format,
        fields: settings.input.fields.clone(),
        label_field: labelled.then(|| settings.input.label_field.clone()),
        id_field: Some(settings.input.id_field.clone()),
        header: !a.no_header,
    })
}

/// `NAME` or `NAME=WEIGHT`.
pub fn parse_field(s: &str) -> Result<FieldSetting> {
    let (name, weight) = match s.rsplit_once('=') {
        Some((n, w)) => (n, w.parse::<f64>().with_context(|| format!("--field {s:?}: weight {w:?} is not a number"))?),
        None => (s, 1.0),
    };
    if name.is_empty() {
        bail!("--field {s:?}: empty field name");
    }
    Ok(FieldSetting { name: name.to_string(), weight })
}

/// Apply model flags to settings (re-validated).
pub fn apply_model_args(settings: &mut Settings, a: &ModelArgs) -> Result<()> {
    if let Some(alpha) = a.alpha {
        settings.model.alpha = alpha;
    }
    if let Some(k) = &a.kind {
        settings.model.kind = parse_kind(k)?;
    }
    if let Some(p) = &a.priors {
        settings.model.priors = match p.as_str() {
            "learned" => PriorKind::Learned,
            "uniform" => PriorKind::Uniform,
            "given" => PriorKind::Given,
            _ => bail!("--priors {p:?}: expected learned, uniform or given"),
        };
    }
    settings.validate().context("flags give invalid settings")?;
    Ok(())
}

pub fn parse_kind(k: &str) -> Result<ModelKind> {
    match k {
        "multinomial" => Ok(ModelKind::Multinomial),
        "complement" => Ok(ModelKind::Complement),
        _ => bail!("model kind {k:?}: expected multinomial or complement"),
    }
}

/// Tally of skipped rows by reason, printed in summaries.
#[derive(Debug, Default)]
pub struct Skipped {
    pub by_reason: std::collections::BTreeMap<&'static str, u64>,
    pub first: Vec<String>,
}

impl Skipped {
    pub fn add(&mut self, e: &RowError) {
        *self.by_reason.entry(e.reason()).or_default() += 1;
        if self.first.len() < 5 {
            self.first.push(e.to_string());
        }
    }

    pub fn total(&self) -> u64 {
        self.by_reason.values().sum()
    }

    pub fn summary(&self) -> String {
        if self.by_reason.is_empty() {
            return "none".into();
        }
        self.by_reason.iter().map(|(r, n)| format!("{n} {r}")).collect::<Vec<_>>().join(", ")
    }
}
