//! The cold-start learning curve: model only against rules blended with the model, after a seeded choice of n labels per class, scored by macro-F1.
//!
//! Labelled examples are chosen per class: the class's training records, in
//! file order, are shuffled by SplitMix64 seeded with the seed and the class
//! index, and the first n are taken, so the 5 chosen are among the 20 chosen.
//! A record nothing decides counts as a miss for its class (it lowers recall,
//! and no class gains a false positive). Macro-F1 is the mean F1 over the
//! curve's classes.

use serde::Serialize;

use crate::eval::folds::SplitMix64;
use crate::eval::Confusion;
use crate::features::Vocabulary;
use crate::model::{Model, NbParams};
use crate::settings::{BlendMode, Settings};

use super::blend::{DecideWork, Decider};
use super::record::{FieldText, RecordTerms};
use super::ruleset::RuleSet;
use crate::decide::{DecidedBy, ReviewPolicy};

/// An analyzed, labelled record.
#[derive(Debug, Clone)]
pub struct Doc {
    pub terms: RecordTerms,
    /// (field index, text, weight).
    pub texts: Vec<(usize, String, f64)>,
    /// Index into the curve's classes.
    pub label: usize,
}

impl Doc {
    pub fn fields(&self) -> Vec<FieldText<'_>> {
        self.texts.iter().map(|(f, t, w)| FieldText { field: *f, text: t, weight: *w }).collect()
    }
}

/// Who decides, in one column of the curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Contender {
    ModelOnly,
    Blend(#[serde(serialize_with = "ser_mode")] BlendMode),
}

fn ser_mode<S: serde::Serializer>(m: &BlendMode, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(m.as_str())
}

impl Contender {
    pub fn name(&self) -> String {
        match self {
            Contender::ModelOnly => "model_only".into(),
            Contender::Blend(m) => m.as_str().into(),
        }
    }
}

/// One cell: a contender at one number of labels, over all seeds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Cell {
    pub contender: String,
    pub macro_f1: Vec<f64>,
    pub mean_macro_f1: f64,
    pub min_macro_f1: f64,
    pub max_macro_f1: f64,
    pub mean_accuracy: f64,
    /// Mean share of test records a rule decided.
    pub by_rules: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Point {
    /// Labels per class; `None` is every training record of the classes.
    pub labels_per_class: Option<usize>,
    /// Mean training records actually used (a class may have fewer than asked).
    pub train_records: f64,
    pub cells: Vec<Cell>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Curve {
    pub classes: Vec<String>,
    pub seeds: Vec<u64>,
    pub test_records: usize,
    pub takeover_labels: u64,
    pub points: Vec<Point>,
}

impl Curve {
    pub fn cell(&self, labels: Option<usize>, contender: &str) -> Option<&Cell> {
        self.points.iter().find(|p| p.labels_per_class == labels)?.cells.iter().find(|c| c.contender == contender)
    }
}

/// The seeded choice of up to `n` training records per class (`None`: all).
pub fn choose(train: &[Doc], k: usize, n: Option<usize>, seed: u64) -> Vec<usize> {
    let mut out = Vec::new();
    for c in 0..k {
        let mut idx: Vec<usize> = (0..train.len()).filter(|&i| train[i].label == c).collect();
        SplitMix64::new(seed ^ (c as u64 + 1).wrapping_mul(0x9e37_79b9_7f4a_7c15)).shuffle(&mut idx);
        idx.truncate(n.unwrap_or(usize::MAX));
        out.extend(idx);
    }
    out.sort_unstable();
    out
}

/// Run the curve. Model parameters and the vocabulary come from `settings.model`,
/// `takeover_labels` and `assign_boost` from `settings.rules`; the review
/// policy is off (only the class matters here).
#[allow(clippy::too_many_arguments)]
pub fn run(
    settings: &Settings,
    rules: &RuleSet,
    classes: &[String],
    train: &[Doc],
    test: &[Doc],
    labels: &[Option<usize>],
    seeds: &[u64],
    contenders: &[Contender],
) -> Curve {
    let k = classes.len();
    let params = NbParams::from_settings(&settings.model);
    let mut points = Vec::new();
    for &n in labels {
        let mut f1 = vec![Vec::new(); contenders.len()];
        let mut acc = vec![0.0; contenders.len()];
        let mut by_rules = vec![0.0; contenders.len()];
        let mut used = 0.0;
        for &seed in seeds {
            let chosen = choose(train, k, n, seed);
            used += chosen.len() as f64;
            let mut model = Model::new(
                params.clone(),
                settings.analyzer.clone(),
                classes.to_vec(),
                Vocabulary::from_settings(&settings.model),
            )
            .expect("classes are distinct and priors were checked");
            for &i in &chosen {
                model.learn(&train[i].terms.bag, &classes[train[i].label], 1.0).expect("known class");
            }
            for (ci, c) in contenders.iter().enumerate() {
                let (blend, set) = match c {
                    Contender::ModelOnly => (BlendMode::ModelFirst, None),
                    Contender::Blend(b) => (*b, Some(rules)),
                };
                let decider = Decider {
                    blend,
                    takeover_labels: settings.rules.takeover_labels as f64,
                    assign_boost: settings.rules.assign_boost,
                    policy: ReviewPolicy::none(),
                    explain_terms: 0,
                };
                let mut conf = Confusion::new(k + 1);
                let mut w = DecideWork::default();
                let mut ruled = 0u64;
                for d in test {
                    let fields = d.fields();
                    let dec = decider.decide_analyzed(set, Some(&model), "curve", None, &fields, &d.terms, &mut w);
                    let pred = if dec.decided_by == DecidedBy::Nobody {
                        k
                    } else {
                        classes.iter().position(|x| *x == dec.class).unwrap_or(k)
                    };
                    if matches!(dec.decided_by, DecidedBy::Rule(_)) {
                        ruled += 1;
                    }
                    conf.add(d.label, pred);
                }
                let mut names = classes.to_vec();
                names.push("(none)".into());
                let pc = conf.per_class(&names);
                f1[ci].push(pc[..k].iter().map(|m| m.f1).sum::<f64>() / k as f64);
                acc[ci] += conf.accuracy();
                by_rules[ci] += ruled as f64 / test.len().max(1) as f64;
            }
        }
        let s = seeds.len() as f64;
        let cells = contenders
            .iter()
            .enumerate()
            .map(|(ci, c)| {
                let v = &f1[ci];
                Cell {
                    contender: c.name(),
                    macro_f1: v.clone(),
                    mean_macro_f1: v.iter().sum::<f64>() / s,
                    min_macro_f1: v.iter().copied().fold(f64::INFINITY, f64::min),
                    max_macro_f1: v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                    mean_accuracy: acc[ci] / s,
                    by_rules: by_rules[ci] / s,
                }
            })
            .collect();
        points.push(Point { labels_per_class: n, train_records: used / s, cells });
    }
    Curve {
        classes: classes.to_vec(),
        seeds: seeds.to_vec(),
        test_records: test.len(),
        takeover_labels: settings.rules.takeover_labels,
        points,
    }
}

/// The curve as a table of mean macro-F1 (min–max over seeds).
pub fn table(c: &Curve) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let names: Vec<&str> =
        c.points.first().map(|p| p.cells.iter().map(|x| x.contender.as_str()).collect()).unwrap_or_default();
    let _ = write!(s, "| labels/class | train records |");
    for n in &names {
        let _ = write!(s, " {n} |");
    }
    s.push('\n');
    let _ = write!(s, "|---:|---:|");
    for _ in &names {
        s.push_str("---:|");
    }
    s.push('\n');
    for p in &c.points {
        let label = p.labels_per_class.map(|n| n.to_string()).unwrap_or_else(|| "all".into());
        let _ = write!(s, "| {label} | {:.0} |", p.train_records);
        for cell in &p.cells {
            let _ = write!(s, " {:.3} ({:.3}–{:.3}) |", cell.mean_macro_f1, cell.min_macro_f1, cell.max_macro_f1);
        }
        s.push('\n');
    }
    s
}
