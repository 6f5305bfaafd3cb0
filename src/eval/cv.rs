//! Cross-validated tuning: counts are built once per fold, then every candidate (kind, α) is scored on the held-out fold by rebuilding only the log cache.

use serde::Serialize;

use crate::features::Vocabulary;
use crate::model::{Model, NbParams, ScoreScratch};
use crate::settings::{AnalyzerSettings, ModelKind, VocabularyKind};
use crate::text::TermBag;

use super::metrics::Confusion;

/// An analyzed, labelled record.
#[derive(Debug, Clone)]
pub struct Example {
    pub bag: TermBag,
    pub label: usize,
}

/// How to make an empty vocabulary for each trained model.
#[derive(Debug, Clone, Copy)]
pub struct VocabSpec {
    pub kind: VocabularyKind,
    pub max: usize,
    pub buckets: usize,
}

impl VocabSpec {
    pub fn make(&self) -> Vocabulary {
        Vocabulary::new(self.kind, self.max, self.buckets)
    }
}

/// Train on the examples at `idx`.
pub fn train(
    examples: &[Example],
    idx: impl IntoIterator<Item = usize>,
    classes: &[String],
    params: &NbParams,
    analyzer: &AnalyzerSettings,
    vocab: VocabSpec,
) -> Model {
    let mut m = Model::new(params.clone(), analyzer.clone(), classes.to_vec(), vocab.make())
        .expect("classes and priors were checked by the caller");
    for i in idx {
        let e = &examples[i];
        m.learn(&e.bag, &classes[e.label], 1.0).expect("known class, checked weights");
    }
    m
}

/// Score the examples at `idx` into a confusion matrix.
pub fn evaluate(model: &Model, examples: &[Example], idx: impl IntoIterator<Item = usize>) -> Confusion {
    let mut conf = Confusion::new(model.classes().len());
    let mut s = ScoreScratch::default();
    for i in idx {
        let e = &examples[i];
        let r = model.score(&e.bag, &mut s);
        conf.add(e.label, r.best);
    }
    conf
}

#[derive(Debug, Clone, Serialize)]
pub struct CandidateResult {
    pub kind: ModelKind,
    pub alpha: f64,
    pub fold_accuracy: Vec<f64>,
    pub mean_accuracy: f64,
    pub std_accuracy: f64,
    pub mean_macro_f1: f64,
    #[serde(skip)]
    pub pooled: Confusion,
}

/// Which number picks the winner.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TuneMetric {
    Accuracy,
    MacroF1,
}

/// k-fold cross-validation of every candidate; `folds[i]` is record i's fold.
pub fn cross_validate(
    examples: &[Example],
    classes: &[String],
    folds: &[usize],
    k: usize,
    candidates: &[NbParams],
    analyzer: &AnalyzerSettings,
    vocab: VocabSpec,
) -> Vec<CandidateResult> {
    let mut results: Vec<CandidateResult> = candidates
        .iter()
        .map(|c| CandidateResult {
            kind: c.kind,
            alpha: c.alpha,
            fold_accuracy: Vec::new(),
            mean_accuracy: 0.0,
            std_accuracy: 0.0,
            mean_macro_f1: 0.0,
            pooled: Confusion::new(classes.len()),
        })
        .collect();
    let mut f1s = vec![Vec::new(); candidates.len()];
    for f in 0..k {
        let train_idx = (0..examples.len()).filter(|&i| folds[i] != f);
        let mut model = train(examples, train_idx, classes, &candidates[0], analyzer, vocab);
        for (ci, cand) in candidates.iter().enumerate() {
            model.set_params(cand.clone()).expect("priors checked");
            let conf = evaluate(&model, examples, (0..examples.len()).filter(|&i| folds[i] == f));
            results[ci].fold_accuracy.push(conf.accuracy());
            f1s[ci].push(conf.macro_f1(classes));
            results[ci].pooled.merge(&conf);
        }
    }
    for (r, f1) in results.iter_mut().zip(&f1s) {
        let n = r.fold_accuracy.len() as f64;
        r.mean_accuracy = r.fold_accuracy.iter().sum::<f64>() / n;
        let var = r.fold_accuracy.iter().map(|a| (a - r.mean_accuracy).powi(2)).sum::<f64>() / n;
        r.std_accuracy = var.sqrt();
        r.mean_macro_f1 = f1.iter().sum::<f64>() / n;
    }
    results
}

/// The best candidate; ties go to the one listed first.
pub fn choose(results: &[CandidateResult], metric: TuneMetric) -> usize {
    let key = |r: &CandidateResult| match metric {
        TuneMetric::Accuracy => r.mean_accuracy,
        TuneMetric::MacroF1 => r.mean_macro_f1,
    };
    let mut best = 0;
    for (i, r) in results.iter().enumerate() {
        if key(r) > key(&results[best]) {
            best = i;
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::folds::{stratified_folds, FoldOrder};
    use crate::settings::Settings;

    fn toy() -> (Vec<Example>, Vec<String>) {
        let mut ex = Vec::new();
        for i in 0..40 {
            let (label, words) = if i % 2 == 0 { (0, ["refund", "card"]) } else { (1, ["parcel", "late"]) };
            let mut bag = TermBag::from_pairs(words.iter().map(|w| (*w, 1.0)));
            bag.push(if i % 5 == 0 { "noise" } else { "hello" }, 1.0);
            ex.push(Example { bag, label });
        }
        (ex, vec!["billing".into(), "shipping".into()])
    }

    #[test]
    fn separable_data_scores_perfectly_under_cv() {
        let (ex, classes) = toy();
        let labels: Vec<usize> = ex.iter().map(|e| e.label).collect();
        let folds = stratified_folds(&labels, 5, 1, FoldOrder::Shuffled);
        let cands = vec![NbParams::multinomial(1.0), NbParams::multinomial(0.1)];
        let vs = VocabSpec { kind: VocabularyKind::Interned, max: 1000, buckets: 0 };
        let r = cross_validate(&ex, &classes, &folds, 5, &cands, &Settings::defaults().analyzer, vs);
        assert_eq!(r.len(), 2);
        assert_eq!(r[0].fold_accuracy.len(), 5);
        assert!(r.iter().all(|c| c.mean_accuracy == 1.0));
        assert_eq!(r[0].pooled.total(), 40);
        assert_eq!(choose(&r, TuneMetric::Accuracy), 0, "ties go to the first candidate");
    }
}
