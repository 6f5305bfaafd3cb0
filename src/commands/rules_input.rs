//! Shared by the rules commands: which rules file to use, field flags, and offline rows as fields with their index in `input.fields`.

use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};

use crate::io::dataset::{Format, Row, Spec};
use crate::io::record::{field_text, json_path};
use crate::rules::{self, RuleSet};
use crate::settings::Settings;

use super::parse_field;

/// `--rules FILE`, else `rules.path`, else an error saying how to give one.
pub fn rules_path(settings: &Settings, flag: Option<&Path>) -> Result<PathBuf> {
    match flag {
        Some(p) => Ok(p.to_path_buf()),
        None if !settings.rules.path.is_empty() => Ok(PathBuf::from(&settings.rules.path)),
        None => bail!("no rules file: give --rules FILE or set rules.path"),
    }
}

/// Load and validate; a refused file keeps its typed `RulesError` (exit code 2).
pub fn load(settings: &Settings, path: &Path) -> Result<RuleSet> {
    Ok(rules::load_for(settings, path)?)
}

/// `--field NAME[=WEIGHT]` flags replace `input.fields` (re-validated).
pub fn apply_fields(settings: &mut Settings, fields: &[String]) -> Result<()> {
    if !fields.is_empty() {
        settings.input.fields = fields.iter().map(|f| parse_field(f)).collect::<Result<_>>()?;
        settings.validate().context("flags give invalid settings")?;
    }
    Ok(())
}

/// The index in `spec.fields` of each of a row's present fields. The reader
/// keeps only present fields, in settings order; presence is read again from
/// the row's JSON form with the same path rules. A text line is field 0.
pub fn slots(row: &Row, spec: &Spec) -> Vec<usize> {
    let present: Vec<usize> = match (&row.raw, spec.format) {
        (Some(v), Format::Jsonl | Format::Csv | Format::Tsv) if v.is_object() => spec
            .fields
            .iter()
            .enumerate()
            .filter(|(_, f)| json_path(v, &f.name).and_then(field_text).is_some())
            .map(|(i, _)| i)
            .collect(),
        _ => vec![0],
    };
    if present.len() == row.fields.len() {
        present
    } else {
        (0..row.fields.len()).collect()
    }
}

/// A row's fields as `(field index, text, weight)`.
pub fn row_texts(row: &Row, spec: &Spec) -> Vec<(usize, String, f64)> {
    slots(row, spec).into_iter().zip(&row.fields).map(|(i, (t, w))| (i, t.clone(), *w)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::dataset;
    use crate::settings::FieldSetting;

    #[test]
    fn slots_skip_missing_fields() {
        let spec = Spec {
            format: Format::Jsonl,
            fields: ["subject", "body", "text"]
                .iter()
                .map(|n| FieldSetting { name: n.to_string(), weight: 1.0 })
                .collect(),
            label_field: None,
            id_field: Some("id".into()),
            header: true,
        };
        let data = b"{\"id\":1,\"body\":\"b\",\"text\":\"t\"}\n{\"id\":2,\"subject\":\"s\"}\n".to_vec();
        let rows: Vec<Row> = dataset::from_reader(Box::new(std::io::Cursor::new(data)), "m", &spec)
            .unwrap()
            .map(|r| r.unwrap())
            .collect();
        assert_eq!(slots(&rows[0], &spec), [1, 2]);
        assert_eq!(row_texts(&rows[1], &spec), [(0, "s".to_string(), 1.0)]);
    }
}
