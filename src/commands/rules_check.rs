//! `sieveline rules-check`: load and validate a rules file, then summarise it (rules, classes, index size) or list every problem with file, line and rule.

use anyhow::Result;
use serde_json::json;

use crate::cli::RulesCheckArgs;
use crate::rules::{Action, CondKind, RuleSet};
use crate::settings::{BlendMode, Settings};

use super::rules_input::{apply_fields, load, rules_path};

pub fn run(mut settings: Settings, args: &RulesCheckArgs) -> Result<()> {
    apply_fields(&mut settings, &args.fields)?;
    let path = rules_path(&settings, args.rules.as_deref())?;
    let set = load(&settings, &path)?;
    let notes = notes(&set, &settings);
    if args.json {
        let rules: Vec<_> = set
            .rules()
            .iter()
            .enumerate()
            .map(|(i, r)| {
                json!({
                    "id": r.id, "class": r.class, "action": r.action.name(),
                    "log_odds": match r.action { Action::Boost(x) => Some(x), _ => None },
                    "priority": r.priority, "guard": r.guard, "line": r.line, "rank": set.rank(i as u32),
                    "conditions": set.conditions(i as u32).len(),
                })
            })
            .collect();
        let doc = json!({
            "file": path.display().to_string(), "valid": true, "fingerprint": set.fingerprint(),
            "rules": rules, "classes": set.classes(), "indexed_terms": set.indexed_terms(), "notes": notes,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    println!(
        "{}: valid, {} rules for {} classes, {} indexed terms (fingerprint {})",
        path.display(),
        set.len(),
        set.classes().len(),
        set.indexed_terms(),
        set.fingerprint()
    );
    for (i, r) in set.rules().iter().enumerate() {
        let conds: Vec<String> = set
            .conditions(i as u32)
            .iter()
            .map(|c| {
                let scope = c.field.map(|f| format!("{}:", set.fields()[f])).unwrap_or_default();
                match c.kind {
                    CondKind::Regex => format!("{scope}regex"),
                    CondKind::Any if c.at_least > 1 => format!("{scope}any({}, >={})", set.items(c).len(), c.at_least),
                    k => format!("{scope}{}({})", k.name(), set.items(c).len()),
                }
            })
            .collect();
        let action = match r.action {
            Action::Boost(x) => format!("boost {x:+}"),
            a => a.name().to_string(),
        };
        println!(
            "  line {:>4}  {:<24} {:<10} -> {:<28} priority {:>4}{}  {}",
            r.line,
            r.id,
            action,
            r.class,
            r.priority,
            if r.guard { "  guard" } else { "" },
            conds.join(" & ")
        );
    }
    for n in &notes {
        println!("note: {n}");
    }
    Ok(())
}

/// Valid but worth knowing, under the current settings.
fn notes(set: &RuleSet, settings: &Settings) -> Vec<String> {
    let mut out = Vec::new();
    if settings.rules.blend == BlendMode::RulesOnly {
        let boosts: Vec<&str> =
            set.rules().iter().filter(|r| matches!(r.action, Action::Boost(_))).map(|r| r.id.as_str()).collect();
        if !boosts.is_empty() {
            out.push(format!(
                "rules.blend = \"rules_only\" consults no model, so boost rules do nothing: {}",
                boosts.join(", ")
            ));
        }
    }
    out
}
