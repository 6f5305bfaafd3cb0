//! The generated 200-rule set of the rules bench and the profiling loop: seeded, over frequent training terms, so every run loads the same set.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams};
use sieveline::rules::{self, RuleSet};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

/// 200 rules over frequent training terms; seeded, so every run loads the same set.
pub fn generated_rules(terms: &[String], classes: &[String], n: usize, seed: u64) -> String {
    let mut rng = SplitMix64::new(seed);
    let mut pick = |k: usize| -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        while out.len() < k {
            let t = &terms[rng.below(terms.len() as u64) as usize];
            if !out.contains(t) {
                out.push(t.clone());
            }
        }
        out
    };
    let list = |v: &[String]| v.iter().map(|t| format!("{t:?}")).collect::<Vec<_>>().join(", ");
    let mut s = String::new();
    for i in 0..n {
        let class = &classes[i % classes.len()];
        let (action, extra) = match i % 10 {
            0..=5 => ("assign", String::new()),
            6..=8 => ("boost", format!("log_odds = {:.1}\n", 0.5 + (i % 7) as f64 * 0.5)),
            _ => ("review", String::new()),
        };
        s += &format!(
            "[[rule]]\nid = \"gen-{i}\"\nclass = \"{class}\"\naction = \"{action}\"\n{extra}priority = {}\n",
            i % 5
        );
        let any = pick(2 + i % 4);
        s += &format!("[[rule.when]]\nany = [{}]\n", list(&any));
        if i % 4 == 0 {
            s += &format!("[[rule.when]]\nall = [{}]\n", list(&pick(2)));
        }
        if i % 5 == 0 {
            s += &format!("[[rule.when]]\nnone = [{}]\n", list(&pick(2)));
        }
        if i % 20 == 0 {
            let t = &pick(1)[0];
            s += &format!("[[rule.when]]\nregex = '(?i)\\b{}\\w*\\b'\n", regex_escape(t));
        }
    }
    s
}

fn regex_escape(t: &str) -> String {
    t.chars().map(|c| if c.is_alphanumeric() { c.to_string() } else { format!("\\{c}") }).collect()
}

fn data_dir() -> PathBuf {
    let dir = std::env::var_os("SIEVELINE_DATA_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/data"));
    let b = dir.join("banking77");
    assert!(b.join("train.csv").is_file(), "Banking77 is missing at {} (set SIEVELINE_DATA_DIR)", b.display());
    b
}

fn read(path: &Path) -> Vec<(String, String)> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records().map(|x| x.unwrap()).map(|x| (x[0].to_string(), x[1].to_string())).collect()
}

/// The Banking77 test records (text, intent), a 77-class model trained on the training
/// file, and the 200 generated rules compiled with the default analyzer.
pub struct Setup {
    pub test: Vec<(String, String)>,
    pub settings: Settings,
    pub analyzer: Analyzer,
    pub model: Model,
    pub set: RuleSet,
}

pub fn setup() -> Setup {
    let dir = data_dir();
    let train = read(&dir.join("train.csv"));
    let test = read(&dir.join("test.csv"));
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let mut classes: Vec<String> = train.iter().map(|(_, c)| c.clone()).collect();
    classes.sort();
    classes.dedup();
    let mut model = Model::new(
        NbParams::multinomial(1.0),
        settings.analyzer.clone(),
        classes.clone(),
        Vocabulary::new(settings.model.vocabulary, settings.model.max_vocabulary, settings.model.hash_buckets),
    )
    .unwrap();
    let mut bag = TermBag::new();
    let mut asc = AnalyzerScratch::default();
    let mut freq: HashMap<String, usize> = HashMap::new();
    for (text, class) in &train {
        analyzer.analyze_fields([(text.as_str(), 1.0)], &mut asc, &mut bag);
        for (t, _) in bag.iter() {
            *freq.entry(t.to_string()).or_default() += 1;
        }
        model.learn(&bag, class, 1.0).unwrap();
    }
    // Frequent plain words (class tokens excluded): rules that really fire.
    let mut terms: Vec<(String, usize)> = freq.into_iter().filter(|(t, _)| !t.starts_with('<')).collect();
    terms.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
    let terms: Vec<String> = terms.into_iter().take(600).map(|(t, _)| t).collect();
    let text = generated_rules(&terms, &classes, 200, 7);
    let set: RuleSet = rules::from_str(&text, "generated-200", &analyzer, &["text".into()]).unwrap();
    assert_eq!(set.len(), 200);
    Setup { test, settings, analyzer, model, set }
}
