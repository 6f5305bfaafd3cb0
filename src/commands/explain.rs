//! `sieveline explain`: one record in; the decision under the blend mode, every rule that fired or found something and why, and the model's top terms.

use anyhow::{bail, Context, Result};
use serde_json::{json, Value};

use crate::cli::ExplainArgs;
use crate::io::record::{field_text, json_path};
use crate::model::snapshot;
use crate::model::{Model, ScoreScratch};
use crate::rules::explain::describe;
use crate::rules::{BlendScratch, Decider, FieldText};
use crate::settings::{BlendMode, Settings};
use crate::text::Analyzer;

use super::rules_input::{apply_fields, load, rules_path};

pub fn run(mut settings: Settings, args: &ExplainArgs) -> Result<()> {
    apply_fields(&mut settings, &args.fields)?;
    if let Some(b) = &args.blend {
        settings.rules.blend = b.parse::<BlendMode>().map_err(|e| anyhow::anyhow!("--blend {e}"))?;
    }
    let analyzer = Analyzer::new(&settings.analyzer).context("analyzer patterns")?;
    let rules = match (&args.rules, settings.rules.path.is_empty()) {
        (None, true) => None,
        _ => Some(load(&settings, &rules_path(&settings, args.rules.as_deref())?)?),
    };
    let loaded = match &args.model {
        Some(p) => Some(snapshot::read(p, Some(&settings.analyzer))?),
        None => None,
    };
    if rules.is_none() && loaded.is_none() {
        bail!("nothing to explain with: give --rules FILE (or set rules.path) and/or --model FILE");
    }
    let texts: Vec<(usize, String)> = match (&args.record, &args.text) {
        (Some(r), _) => {
            let v: Value = serde_json::from_str(r).context("--record is not valid JSON")?;
            if !v.is_object() {
                bail!("--record must be a JSON object");
            }
            let t: Vec<(usize, String)> = settings
                .input
                .fields
                .iter()
                .enumerate()
                .filter_map(|(i, f)| json_path(&v, &f.name).and_then(field_text).map(|t| (i, t.into_owned())))
                .collect();
            if t.is_empty() {
                let names: Vec<&str> = settings.input.fields.iter().map(|f| f.name.as_str()).collect();
                bail!("--record has none of the input fields {}", names.join(", "));
            }
            t
        }
        (None, Some(t)) => vec![(0, t.clone())],
        (None, None) => bail!("give the record with --record JSON or --text TEXT"),
    };
    let fields: Vec<FieldText> =
        texts.iter().map(|(i, t)| FieldText { field: *i, text: t, weight: settings.input.fields[*i].weight }).collect();
    let decider = Decider::from_settings(&settings);
    let model: Option<&Model> = loaded.as_ref().map(|l| &l.model);
    let version = loaded.as_ref().map(|l| l.served_version()).unwrap_or_default();
    let mut s = BlendScratch::default();
    let decision = decider.decide(&analyzer, rules.as_ref(), model, &version, None, &fields, &mut s);
    let traces = rules.as_ref().map(|r| r.explain(&s.terms, &fields, args.all)).unwrap_or_default();
    // The model on its own, without boosts: its posterior and the terms behind it.
    let model_view = model.filter(|m| !m.is_empty()).map(|m| {
        let mut sc = ScoreScratch::default();
        let scored = m.score(&s.terms.bag, &mut sc);
        let post = Model::posteriors(&sc.scores);
        let mut order: Vec<usize> = (0..post.len()).collect();
        order.sort_by(|&a, &b| post[b].total_cmp(&post[a]).then(a.cmp(&b)));
        let top: Vec<(String, f64)> = order.iter().take(3).map(|&c| (m.classes()[c].clone(), post[c])).collect();
        (top, m.explain(&s.terms.bag, &sc, &scored, args.top))
    });
    if args.json {
        let doc = json!({
            "blend": settings.rules.blend.as_str(),
            "decision": decision,
            "rules": traces,
            "model": model_view.as_ref().map(|(top, terms)| json!({"posteriors": top, "top_terms": terms})),
            "terms": s.terms.bag.aggregated(),
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    let review = decision.review.as_ref().map(|r| format!(", review: {}", r.label())).unwrap_or_default();
    println!(
        "decision ({}): class {:?} by {}, confidence {:.4}{}",
        settings.rules.blend.as_str(),
        decision.class,
        decision.decided_by.label(),
        decision.confidence,
        review
    );
    let terms: Vec<String> = s.terms.bag.aggregated().into_iter().map(|(t, _)| t).collect();
    println!("analyzed terms: {}", terms.join(" "));
    match &rules {
        None => println!("\nrules: none loaded"),
        Some(r) => {
            let fired = traces.iter().filter(|t| t.fired).count();
            println!("\nrules ({}): {fired} fired; in precedence order:", r.source());
            if traces.is_empty() {
                println!("  no rule found anything in this record");
            }
            for t in &traces {
                println!("  {}", describe(t).replace('\n', "\n  "));
            }
        }
    }
    match &model_view {
        None => println!("\nmodel: {}", if model.is_some() { "empty (no labels yet)" } else { "none loaded" }),
        Some((top, terms)) => {
            let tops: Vec<String> = top.iter().map(|(c, p)| format!("{c} {p:.4}")).collect();
            println!("\nmodel (version {version}, no boosts): {}", tops.join(", "));
            println!("top terms for {} over {}:", top[0].0, top.get(1).map(|t| t.0.as_str()).unwrap_or("-"));
            for t in terms {
                println!("  {:<24} {:+.4}", t.term, t.weight);
            }
        }
    }
    Ok(())
}
