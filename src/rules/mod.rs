//! Hand-written rules: the TOML file format, validation with file/line/rule in every message, compilation into one term index, matching, explanations and per-rule reports.
//!
//! - `format`: the file's serde shapes, with spans for line numbers;
//! - `compile`: validation and compilation into a [`RuleSet`];
//! - `ruleset`: the immutable compiled set (rules, conditions, term index, regex set);
//! - `index`: the term index, short terms packed into integer keys;
//! - `record`: a record's analyzed terms with each field's share, as rules see it;
//! - `matcher`: the hot path, one index lookup per token;
//! - `explain`: the slow path, which conditions held and what they found;
//! - `report`: per-rule fires, precision and class shares, conflicts, coverage;
//! - `blend`: rules + model → `Decision`, under the blend mode from settings;
//! - `curve`: the cold-start learning curve, model only against blended.
//!
//! Pure code: the only I/O is [`load`], which reads the file it is given.
//! The format is documented in `docs/rules.md`.

pub mod blend;
pub mod compile;
pub mod curve;
pub mod error;
pub mod explain;
mod format;
mod index;
pub mod matcher;
pub mod record;
pub mod report;
pub mod ruleset;

use std::path::Path;

pub use blend::{BlendScratch, Decider};
pub use error::{Problem, RulesError};
pub use matcher::MatchScratch;
pub use record::{FieldSpan, FieldText, RecordTerms};
pub use ruleset::{Action, Cond, CondKind, Item, Rule, RuleSet};

use crate::settings::Settings;
use crate::text::Analyzer;

/// Read, validate and compile a rules file. Either every rule is valid and a
/// whole set is returned, or nothing is: there is no partial set.
pub fn load(path: &Path, analyzer: &Analyzer, fields: &[String]) -> Result<RuleSet, RulesError> {
    let name = path.display().to_string();
    let text =
        std::fs::read_to_string(path).map_err(|e| RulesError::Read { path: name.clone(), reason: e.to_string() })?;
    compile::compile(&text, &name, analyzer, fields)
}

/// `load` with the analyzer and input fields taken from settings.
pub fn load_for(settings: &Settings, path: &Path) -> Result<RuleSet, RulesError> {
    let analyzer = Analyzer::new(&settings.analyzer).map_err(|e| RulesError::Read {
        path: path.display().to_string(),
        reason: format!("analyzer patterns do not compile: {e}"),
    })?;
    load(path, &analyzer, &field_names(settings))
}

/// Compile rules from text (tests and tools); `name` stands for the file in messages.
pub fn from_str(text: &str, name: &str, analyzer: &Analyzer, fields: &[String]) -> Result<RuleSet, RulesError> {
    compile::compile(text, name, analyzer, fields)
}

/// The names of `input.fields`, in order: what `field = ...` refers to.
pub fn field_names(settings: &Settings) -> Vec<String> {
    settings.input.fields.iter().map(|f| f.name.clone()).collect()
}
