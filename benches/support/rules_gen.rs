//! The generated 200-rule sets of the rules bench and the profiling loop, seeded so every run loads the same sets: one over the most frequent training terms (the worst case: about 8 rules fire per record), one over each class's distinctive terms (as people write rules).

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use sieveline::eval::folds::SplitMix64;
use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams};
use sieveline::rules::{self, RuleSet};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

/// `n` rules, rule `i` for class `i % classes`; its `any`/`all` terms are drawn from
/// `terms_for(class)` and its `none` terms from `terms_for` of another class. Seeded.
pub fn generated_rules(terms_for: &dyn Fn(usize) -> Vec<String>, classes: &[String], n: usize, seed: u64) -> String {
    let mut rng = SplitMix64::new(seed);
    let mut pick = |terms: &[String], k: usize| -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        while out.len() < k.min(terms.len()) {
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
        let c = i % classes.len();
        let class = &classes[c];
        let own = terms_for(c);
        let other = terms_for((c + 1 + i / classes.len()) % classes.len());
        let (action, extra) = match i % 10 {
            0..=5 => ("assign", String::new()),
            6..=8 => ("boost", format!("log_odds = {:.1}\n", 0.5 + (i % 7) as f64 * 0.5)),
            _ => ("review", String::new()),
        };
        s += &format!(
            "[[rule]]\nid = \"gen-{i}\"\nclass = \"{class}\"\naction = \"{action}\"\n{extra}priority = {}\n",
            i % 5
        );
        let any = pick(&own, 2 + i % 4);
        s += &format!("[[rule.when]]\nany = [{}]\n", list(&any));
        if i % 4 == 0 {
            s += &format!("[[rule.when]]\nall = [{}]\n", list(&pick(&own, 2)));
        }
        if i % 5 == 0 {
            s += &format!("[[rule.when]]\nnone = [{}]\n", list(&pick(&other, 2)));
        }
        if i % 20 == 0 {
            let t = &pick(&own, 1)[0];
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
    /// Over the most frequent terms: the worst case.
    pub set: RuleSet,
    /// Over each class's distinctive terms (the profiling loop uses only the worst case).
    #[allow(dead_code)]
    pub distinctive: RuleSet,
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
    let mut per_class: HashMap<(String, usize), usize> = HashMap::new();
    for (text, class) in &train {
        analyzer.analyze_fields([(text.as_str(), 1.0)], &mut asc, &mut bag);
        let c = classes.binary_search(class).unwrap();
        for (t, _) in bag.iter() {
            *freq.entry(t.to_string()).or_default() += 1;
            *per_class.entry((t.to_string(), c)).or_default() += 1;
        }
        model.learn(&bag, class, 1.0).unwrap();
    }
    // A class's distinctive terms: plain words in at least 3 of its training records, by
    // the share of the term's records that are of the class; those with at least half, and
    // never fewer than the 8 best.
    let mut cands: Vec<Vec<(f64, usize, String)>> = vec![Vec::new(); classes.len()];
    for ((t, c), k) in &per_class {
        if *k >= 3 && !t.starts_with('<') {
            cands[*c].push((*k as f64 / freq[t] as f64, *k, t.clone()));
        }
    }
    let distinct: Vec<Vec<String>> = cands
        .into_iter()
        .map(|mut v| {
            v.sort_by(|a, b| b.0.total_cmp(&a.0).then(b.1.cmp(&a.1)).then(a.2.cmp(&b.2)));
            let keep = v.iter().filter(|x| x.0 >= 0.5).count().max(8).min(v.len());
            v.truncate(keep);
            assert!(!v.is_empty(), "every Banking77 intent has words of its own");
            v.into_iter().map(|x| x.2).collect()
        })
        .collect();
    // Frequent plain words (class tokens excluded): rules that really fire.
    let mut terms: Vec<(String, usize)> = freq.into_iter().filter(|(t, _)| !t.starts_with('<')).collect();
    terms.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
    let terms: Vec<String> = terms.into_iter().take(600).map(|(t, _)| t).collect();
    let text = generated_rules(&|_| terms.clone(), &classes, 200, 7);
    let set: RuleSet = rules::from_str(&text, "generated-200", &analyzer, &["text".into()]).unwrap();
    assert_eq!(set.len(), 200);
    let text = generated_rules(&|c| distinct[c].clone(), &classes, 200, 7);
    let distinctive: RuleSet = rules::from_str(&text, "distinctive-200", &analyzer, &["text".into()]).unwrap();
    assert_eq!(distinctive.len(), 200);
    Setup { test, settings, analyzer, model, set, distinctive }
}
