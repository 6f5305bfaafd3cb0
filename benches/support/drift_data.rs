//! The drift bench's data: the committed demo streams (invented scenario) and a model trained on their phase-1 records with the true classes. Shared by `benches/drift.rs` and `examples/drift_loop.rs`.

use std::path::Path;
use std::sync::Arc;

use sieveline::features::Vocabulary;
use sieveline::io::message::Inbound;
use sieveline::model::snapshot::SnapshotMeta;
use sieveline::model::{Model, NbParams};
use sieveline::runtime::model_view::ModelView;
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

pub struct Stream {
    pub name: &'static str,
    pub lines: Vec<Vec<u8>>,
    pub settings: Settings,
    pub view: Arc<ModelView>,
}

pub fn load(name: &'static str, fields: &[(&str, f64)]) -> Stream {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-stream");
    let text = std::fs::read_to_string(dir.join(format!("{name}.jsonl"))).expect("demo stream");
    let truth = std::fs::read_to_string(dir.join(format!("{name}.truth.jsonl"))).expect("demo truth");
    let lines: Vec<Vec<u8>> = text.lines().map(|l| l.as_bytes().to_vec()).collect();
    let truth: Vec<serde_json::Value> = truth.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let mut classes: Vec<String> = truth.iter().map(|t| t["class"].as_str().unwrap().to_string()).collect();
    classes.sort();
    classes.dedup();
    let mut model = Model::new(
        NbParams::multinomial(1.0),
        settings.analyzer.clone(),
        classes,
        Vocabulary::new(settings.model.vocabulary, settings.model.max_vocabulary, settings.model.hash_buckets),
    )
    .unwrap();
    let (mut asc, mut bag) = (AnalyzerScratch::default(), TermBag::new());
    for (line, t) in lines.iter().zip(&truth) {
        if t["phase"] != 1 {
            continue;
        }
        let rec: serde_json::Value = serde_json::from_slice(line).unwrap();
        let f: Vec<(String, f64)> = fields.iter().map(|(n, w)| (rec[*n].as_str().unwrap_or("").to_string(), *w)).collect();
        analyzer.analyze_fields(f.iter().map(|(t, w)| (t.as_str(), *w)), &mut asc, &mut bag);
        model.learn(&bag, t["class"].as_str().unwrap(), 1.0).unwrap();
    }
    let meta = SnapshotMeta::fresh(&model, Some("bench".into()));
    let view = Arc::new(ModelView::new(model, meta, "bench".into(), "bench".into()));
    Stream { name, lines, settings, view }
}

pub fn inbound(payload: &[u8], offset: i64) -> Inbound<'_> {
    Inbound { topic: "bench", partition: 0, offset, key: None, payload: Some(payload), headers: Vec::new(), timestamp_ms: None }
}

/// The two demo streams: tickets (subject × 2, body) and log lines (text).
pub fn streams() -> Vec<Stream> {
    vec![load("tickets", &[("subject", 2.0), ("body", 1.0)]), load("logs", &[("text", 1.0)])]
}
