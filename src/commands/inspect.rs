//! `sieveline inspect`: what a model file holds — classes, document and token counts, vocabulary, label offsets and each class's most telling terms.

use anyhow::Result;
use serde_json::json;

use crate::cli::InspectArgs;
use crate::model::snapshot;
use crate::model::Model;
use crate::settings::Settings;

/// Terms most indicative of each class: the smoothed log ratio of the term's
/// rate in the class against its rate in all other classes, among terms seen
/// at least twice in the class (interned vocabularies only).
pub fn top_terms(model: &Model, n: usize) -> Vec<Vec<(String, f64)>> {
    let k = model.classes().len();
    let a = model.params().alpha;
    let v = model.effective_vocabulary().max(1.0);
    let totals = model.class_totals();
    let grand: f64 = totals.iter().sum();
    let mut out = vec![Vec::new(); k];
    for (c, list) in out.iter_mut().enumerate() {
        let rest_total = grand - totals[c];
        let mut scored: Vec<(f64, &str)> = Vec::new();
        for (id, term) in model.vocabulary().terms().enumerate() {
            let row = model.row(id as u32);
            if row[c] < 2.0 {
                continue;
            }
            let rest = model.row_total(id as u32) - row[c];
            let own = ((row[c] + a) / (totals[c] + a * v)).ln();
            let other = ((rest + a) / (rest_total + a * v)).ln();
            scored.push((own - other, term));
        }
        scored.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(y.1)));
        *list = scored.into_iter().take(n).map(|(s, t)| (t.to_string(), (s * 1e4).round() / 1e4)).collect();
    }
    out
}

pub fn run(settings: Settings, args: &InspectArgs) -> Result<()> {
    // Inspect shows any model, whatever analyzer it was built with.
    let _ = settings;
    let loaded = snapshot::read(&args.model, None)?;
    let m = &loaded.model;
    let tops = top_terms(m, args.top);
    if args.json {
        let classes: Vec<_> = m
            .classes()
            .iter()
            .enumerate()
            .map(|(i, c)| json!({"class": c, "documents": m.doc_counts()[i], "tokens": m.class_totals()[i], "top_terms": tops[i]}))
            .collect();
        let doc = json!({
            "file": args.model.display().to_string(),
            "checksum": loaded.checksum,
            "model_version": loaded.meta.model_version,
            "created_at": loaded.meta.created_at,
            "count_fingerprint": m.fingerprint(),
            "params": m.params(),
            "vocabulary": m.vocabulary().kind(),
            "vocabulary_size": m.vocabulary_size(),
            "rows": m.rows(),
            "documents": m.documents(),
            "label_offsets": loaded.meta.label_offsets,
            "labels_learned": loaded.meta.labels_learned,
            "analyzer_fingerprint": crate::text::analyzer::fingerprint(m.analyzer_settings()),
            "classes": classes,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(());
    }
    println!("model {}  version {}  created {}", args.model.display(), loaded.meta.model_version, loaded.meta.created_at);
    println!(
        "kind {:?}  alpha {}  priors {:?}  vocabulary {:?} ({} terms, {} rows)  documents {}",
        m.params().kind,
        m.params().alpha,
        m.params().priors,
        m.vocabulary().kind(),
        m.vocabulary_size(),
        m.rows(),
        m.documents()
    );
    println!("count fingerprint {}  checksum {}", m.fingerprint(), &loaded.checksum[..16]);
    println!("label offsets {}", serde_json::to_string(&loaded.meta.label_offsets)?);
    let w = m.classes().iter().map(|c| c.len()).max().unwrap_or(5).max(5);
    println!("\n{:<w$}  {:>10}  {:>12}  top terms", "class", "documents", "tokens");
    for (i, c) in m.classes().iter().enumerate() {
        let terms: Vec<&str> = tops[i].iter().map(|(t, _)| t.as_str()).collect();
        println!("{:<w$}  {:>10}  {:>12}  {}", c, m.doc_counts()[i], m.class_totals()[i], terms.join(", "));
    }
    Ok(())
}
