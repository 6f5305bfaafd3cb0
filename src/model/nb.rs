//! Naive Bayes counts with exact learn/unlearn in O(record length), and the per-row cache of log weights used by scoring.
//!
//! ```text
//! multinomial: score(c) = ln π(c) + Σ_t w_t · ln(n_ct + α) − W · ln(N_c + α·|V|)
//! complement:  score(c) = Σ_t w_t · −ln(T_t − n_ct + α) + W · ln(T − N_c + α·|V|)
//! ```
//! The per-row data (counts, row totals, log weights) lives in a `RowStore` of
//! shared segments and the vocabulary is a shared base plus a small delta, so
//! `clone()` (publishing a read-only view) copies a row table, not rows, and
//! the next `learn` copies only the rows it writes to.
//!
//! `w_t` is a term's weighted count in the record, `W` the sum over known
//! terms, `n_ct` the class-term count, `N_c` its class total, `T_t` the term's
//! total over classes and `T` the grand total. `|V|` is the number of terms
//! with a non-zero count (interned) or the bucket count (hashed). The
//! complement form is scikit-learn's `ComplementNB(norm=False)`; like it, it
//! ignores priors. All weights are multiples of 1/16, so every count is an
//! exact f64 and learning in any order gives bit-identical counts.

use std::collections::BTreeMap;

use crate::error::ModelError;
use crate::features::Vocabulary;
use crate::settings::{AnalyzerSettings, ModelKind, PriorKind, Settings, MAX_WEIGHT, WEIGHT_QUANTUM};
use crate::text::TermBag;

use super::params::NbParams;
use super::rows::{RowStore, Sharing};

/// The model: counts plus the caches scoring reads. A model exists only after
/// construction from checked parameters, training, or a snapshot load.
#[derive(Debug, Clone)]
pub struct Model {
    pub(crate) params: NbParams,
    pub(crate) analyzer: AnalyzerSettings,
    pub(crate) classes: Vec<String>,
    pub(crate) vocab: Vocabulary,
    pub(crate) k: usize,
    /// Per row: the K counts, the row total and the K cached log weights.
    pub(crate) cells: RowStore,
    pub(crate) class_totals: Vec<f64>,
    pub(crate) doc_counts: Vec<f64>,
    pub(crate) total: f64,
    pub(crate) live_terms: usize,
    pub(crate) norm: Vec<f64>,
    pub(crate) log_prior: Vec<f64>,
    /// Identifies the class list: two models with the same id have the same
    /// classes in the same order (a clone keeps it; changing the classes
    /// takes a fresh one). Lets callers cache class lookups without comparing names.
    pub(crate) classes_id: u64,
    /// Reused by `learn` and `unlearn` for the (row, weight) cells of a record; empty between calls.
    scratch: Vec<(u32, f64)>,
}

/// A fresh `classes_id`, never handed out before in this process.
fn next_classes_id() -> u64 {
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(1);
    NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed)
}

/// What one `learn` did.
#[derive(Debug, Default, Clone, Copy, PartialEq)]
pub struct LearnOutcome {
    /// Term occurrences that found no room in a full vocabulary.
    pub dropped_terms: usize,
    /// Terms new to the vocabulary.
    pub new_terms: usize,
}

impl Model {
    /// An empty model of `classes` with the parameters, analyzer and vocabulary the settings name.
    pub fn from_settings(settings: &Settings, classes: Vec<String>) -> Result<Model, ModelError> {
        Model::new(NbParams::from_settings(&settings.model), settings.analyzer.clone(), classes, Vocabulary::from_settings(&settings.model))
    }

    pub fn new(
        params: NbParams,
        analyzer: AnalyzerSettings,
        classes: Vec<String>,
        vocab: Vocabulary,
    ) -> Result<Model, ModelError> {
        check_classes(&classes)?;
        if params.priors == PriorKind::Given {
            for c in &classes {
                if !params.given_priors.contains_key(c) {
                    return Err(ModelError::MissingPrior(c.clone()));
                }
            }
        }
        let k = classes.len();
        let rows = vocab.rows();
        let empty = cell_weight(params.kind, params.alpha, 0.0, 0.0);
        let mut m = Model {
            params,
            analyzer,
            classes,
            vocab,
            k,
            cells: RowStore::new(k, rows, empty),
            class_totals: vec![0.0; k],
            doc_counts: vec![0.0; k],
            total: 0.0,
            live_terms: 0,
            norm: Vec::new(),
            log_prior: Vec::new(),
            classes_id: next_classes_id(),
            scratch: Vec::new(),
        };
        m.refresh_class_terms();
        Ok(m)
    }

    /// Build from stored counts, rows × K in row-major order (snapshot load);
    /// derives totals and caches.
    pub(crate) fn from_counts(
        params: NbParams,
        analyzer: AnalyzerSettings,
        classes: Vec<String>,
        vocab: Vocabulary,
        doc_counts: Vec<f64>,
        counts: impl ExactSizeIterator<Item = f64>,
    ) -> Result<Model, ModelError> {
        let mut m = Model::new(params, analyzer, classes, vocab)?;
        assert_eq!(counts.len(), m.rows() * m.k);
        let mut counts = counts;
        m.cells.for_each_mut(|_, row| {
            for (cell, v) in row.counts.iter_mut().zip(&mut counts) {
                *cell = v;
            }
        });
        m.doc_counts = doc_counts;
        m.recount();
        m.rebuild_cache();
        Ok(m)
    }

    pub fn classes(&self) -> &[String] {
        &self.classes
    }

    pub fn class_index(&self, class: &str) -> Option<usize> {
        self.classes.iter().position(|c| c == class)
    }

    /// Equal for two models only if they have the same classes in the same order.
    pub fn classes_id(&self) -> u64 {
        self.classes_id
    }

    pub fn params(&self) -> &NbParams {
        &self.params
    }

    pub fn analyzer_settings(&self) -> &AnalyzerSettings {
        &self.analyzer
    }

    pub fn vocabulary(&self) -> &Vocabulary {
        &self.vocab
    }

    /// Terms with a non-zero count.
    pub fn vocabulary_size(&self) -> usize {
        self.live_terms
    }

    /// The effective |V| in the smoothing denominator.
    pub fn effective_vocabulary(&self) -> f64 {
        match self.vocab {
            Vocabulary::Interned(_) => self.live_terms as f64,
            Vocabulary::Hashed { buckets } => buckets as f64,
        }
    }

    pub fn doc_counts(&self) -> &[f64] {
        &self.doc_counts
    }

    pub fn class_totals(&self) -> &[f64] {
        &self.class_totals
    }

    pub fn documents(&self) -> f64 {
        self.doc_counts.iter().sum()
    }

    /// True until the first document is learned.
    pub fn is_empty(&self) -> bool {
        // Counts are never negative, so one non-zero class answers it (no sum over K per record).
        self.doc_counts.iter().all(|&d| d == 0.0)
    }

    /// The K class counts of a row.
    pub fn row(&self, id: u32) -> &[f64] {
        self.cells.counts(id)
    }

    pub fn row_total(&self, id: u32) -> f64 {
        self.cells.total(id)
    }

    pub fn rows(&self) -> usize {
        self.cells.len()
    }

    /// How much row storage this model shares with `other` (a clone, or the
    /// model it was cloned from), and how much it holds. A fresh clone shares
    /// every row; each row a later `learn` writes to stops being shared.
    pub fn row_sharing(&self, other: &Model) -> Sharing {
        self.cells.sharing(&other.cells)
    }

    /// Learn a record's terms as `class`, each occurrence scaled by `weight`.
    pub fn learn(&mut self, bag: &TermBag, class: &str, weight: f64) -> Result<LearnOutcome, ModelError> {
        let c = self.class_index(class).ok_or_else(|| ModelError::UnknownClass(class.to_string()))?;
        check_weights(bag, weight)?;
        let mut out = LearnOutcome::default();
        let mut cells = std::mem::take(&mut self.scratch);
        cells.clear();
        for (term, w) in bag.iter() {
            let rows_before = self.vocab.rows();
            let Some(id) = self.vocab.intern(term) else {
                out.dropped_terms += 1;
                continue;
            };
            if self.vocab.rows() > rows_before {
                self.push_row();
                out.new_terms += 1;
            }
            cells.push((id, w * weight));
        }
        self.add_cells(&cells, c);
        self.scratch = cells;
        self.doc_counts[c] += weight;
        self.refresh_class_terms();
        Ok(out)
    }

    /// Exactly undo an earlier `learn` of the same terms, class and weight.
    /// Refused, with nothing changed, if the counts show it was not learned.
    pub fn unlearn(&mut self, bag: &TermBag, class: &str, weight: f64) -> Result<(), ModelError> {
        let c = self.class_index(class).ok_or_else(|| ModelError::UnknownClass(class.to_string()))?;
        check_weights(bag, weight)?;
        let full = self.vocab.rows() >= self.vocab.capacity() && matches!(self.vocab, Vocabulary::Interned(_));
        // Check first, so a refused unlearn changes nothing.
        let mut need: Vec<(u32, f64)> = Vec::with_capacity(bag.len());
        for (term, w) in bag.iter() {
            match self.vocab.lookup(term) {
                Some(id) => need.push((id, w * weight)),
                None if full => {} // was dropped at learn time too
                None => return Err(ModelError::NotLearned { class: class.to_string() }),
            }
        }
        need.sort_by_key(|e| e.0);
        let mut i = 0;
        while i < need.len() {
            let id = need[i].0;
            let mut sum = 0.0;
            while i < need.len() && need[i].0 == id {
                sum += need[i].1;
                i += 1;
            }
            if self.cells.counts(id)[c] < sum {
                return Err(ModelError::NotLearned { class: class.to_string() });
            }
        }
        if self.doc_counts[c] < weight {
            return Err(ModelError::NotLearned { class: class.to_string() });
        }
        for e in &mut need {
            e.1 = -e.1;
        }
        self.add_cells(&need, c);
        self.doc_counts[c] -= weight;
        self.refresh_class_terms();
        Ok(())
    }

    /// Add a new class with zero counts (online learning with new classes allowed).
    pub fn add_class(&mut self, class: &str) -> Result<usize, ModelError> {
        if self.class_index(class).is_some() {
            return Err(ModelError::DuplicateClass(class.to_string()));
        }
        if self.params.priors == PriorKind::Given && !self.params.given_priors.contains_key(class) {
            return Err(ModelError::MissingPrior(class.to_string()));
        }
        let k = self.k;
        self.cells = self.remap_columns(k + 1, |old, new| new[..k].copy_from_slice(old));
        self.classes.push(class.to_string());
        self.classes_id = next_classes_id();
        self.class_totals.push(0.0);
        self.doc_counts.push(0.0);
        self.k += 1;
        self.rebuild_cache();
        Ok(self.k - 1)
    }

    /// Put the classes in `order` (a permutation of the current classes).
    pub fn reorder_classes(&mut self, order: &[String]) -> Result<(), ModelError> {
        check_classes(order)?;
        let map: Vec<usize> = order
            .iter()
            .map(|c| self.class_index(c).ok_or_else(|| ModelError::UnknownClass(c.clone())))
            .collect::<Result<_, _>>()?;
        if map.len() != self.k {
            return Err(ModelError::UnknownClass(format!("{} classes given for {}", map.len(), self.k)));
        }
        self.cells = self.remap_columns(self.k, |old, new| {
            for (new_c, &old_c) in map.iter().enumerate() {
                new[new_c] = old[old_c];
            }
        });
        self.doc_counts = map.iter().map(|&o| self.doc_counts[o]).collect();
        self.class_totals = map.iter().map(|&o| self.class_totals[o]).collect();
        self.classes = order.to_vec();
        self.classes_id = next_classes_id();
        self.rebuild_cache();
        Ok(())
    }

    /// Change hyper-parameters; counts stay, caches are rebuilt (O(rows × K)).
    pub fn set_params(&mut self, params: NbParams) -> Result<(), ModelError> {
        if params.priors == PriorKind::Given {
            for c in &self.classes {
                if !params.given_priors.contains_key(c) {
                    return Err(ModelError::MissingPrior(c.clone()));
                }
            }
        }
        self.params = params;
        self.rebuild_cache();
        Ok(())
    }

    /// A hash of the counts themselves (classes, document counts and every
    /// non-zero row keyed by its term), independent of interning order.
    pub fn fingerprint(&self) -> String {
        let mut h = blake3::Hasher::new();
        h.update(b"sieveline-counts-v1\n");
        for c in &self.classes {
            h.update(&(c.len() as u64).to_le_bytes());
            h.update(c.as_bytes());
        }
        for d in &self.doc_counts {
            h.update(&d.to_le_bytes());
        }
        let put_row = |h: &mut blake3::Hasher, id: u32| {
            for v in self.cells.counts(id) {
                h.update(&v.to_le_bytes());
            }
        };
        match &self.vocab {
            Vocabulary::Interned(v) => {
                let term = |id: u32| v.term(id).expect("every row has a term");
                let mut ids: Vec<u32> = (0..v.len() as u32).filter(|&i| self.cells.total(i) != 0.0).collect();
                ids.sort_by(|&a, &b| term(a).cmp(term(b)));
                for id in ids {
                    h.update(&(term(id).len() as u64).to_le_bytes());
                    h.update(term(id).as_bytes());
                    put_row(&mut h, id);
                }
            }
            Vocabulary::Hashed { buckets } => {
                h.update(&buckets.to_le_bytes());
                for id in 0..self.rows() as u32 {
                    if self.cells.total(id) != 0.0 {
                        h.update(&(id as u64).to_le_bytes());
                        put_row(&mut h, id);
                    }
                }
            }
        }
        h.finalize().to_hex()[..32].to_string()
    }

    /// Counts per class of every non-zero term, keyed by term (interned only):
    /// the comparable form used by tests and tools.
    pub fn term_counts(&self) -> BTreeMap<String, Vec<f64>> {
        let mut out = BTreeMap::new();
        for (id, t) in self.vocab.terms().enumerate() {
            if self.cells.total(id as u32) != 0.0 {
                out.insert(t.to_string(), self.row(id as u32).to_vec());
            }
        }
        out
    }

    // ---- internals -------------------------------------------------------

    fn push_row(&mut self) {
        let v = cell_weight(self.params.kind, self.params.alpha, 0.0, 0.0);
        self.cells.push(v);
    }

    /// Add each weight to its row's count in class `c`, in order, with the totals,
    /// the live-term count and the row's log weights.
    fn add_cells(&mut self, cells: &[(u32, f64)], c: usize) {
        let (kind, alpha) = (self.params.kind, self.params.alpha);
        let Model { cells: rows, class_totals, total, live_terms, .. } = self;
        rows.update(cells, c, |row, w| {
            let before = *row.total;
            row.counts[c] += w;
            *row.total += w;
            let after = *row.total;
            match kind {
                ModelKind::Multinomial => row.logw[c] = cell_weight(kind, alpha, row.counts[c], after),
                ModelKind::Complement => {
                    for (lw, &n) in row.logw.iter_mut().zip(row.counts.iter()) {
                        *lw = cell_weight(kind, alpha, n, after);
                    }
                }
            }
            class_totals[c] += w;
            *total += w;
            if before == 0.0 && after != 0.0 {
                *live_terms += 1;
            } else if before != 0.0 && after == 0.0 {
                *live_terms -= 1;
            }
        });
    }

    /// A new row store with `k` columns per row: `fill(old counts, new counts)`
    /// writes each row's counts; row totals carry over, log weights are left for
    /// `rebuild_cache`.
    fn remap_columns(&self, k: usize, mut fill: impl FnMut(&[f64], &mut [f64])) -> RowStore {
        let mut cells = RowStore::new(k, self.rows(), 0.0);
        cells.for_each_mut(|id, row| {
            fill(self.cells.counts(id as u32), row.counts);
            *row.total = self.cells.total(id as u32);
        });
        cells
    }

    /// Totals from the counts (after a load).
    fn recount(&mut self) {
        let k = self.k;
        let mut class_totals = vec![0.0; k];
        let mut live_terms = 0;
        self.cells.for_each_mut(|_, row| {
            let mut t = 0.0;
            for (ct, &v) in class_totals.iter_mut().zip(row.counts.iter()) {
                t += v;
                *ct += v;
            }
            *row.total = t;
            if t != 0.0 {
                live_terms += 1;
            }
        });
        self.class_totals = class_totals;
        self.live_terms = live_terms;
        self.total = self.class_totals.iter().sum();
    }

    pub(crate) fn rebuild_cache(&mut self) {
        let (kind, alpha) = (self.params.kind, self.params.alpha);
        self.cells.for_each_mut(|_, row| {
            let t = *row.total;
            for (lw, &n) in row.logw.iter_mut().zip(row.counts.iter()) {
                *lw = cell_weight(kind, alpha, n, t);
            }
        });
        self.refresh_class_terms();
    }

    /// The O(K) per-class terms: normaliser and log prior.
    fn refresh_class_terms(&mut self) {
        let a = self.params.alpha;
        let v = self.effective_vocabulary();
        self.norm = match self.params.kind {
            ModelKind::Multinomial => self.class_totals.iter().map(|&n| (n + a * v).ln()).collect(),
            ModelKind::Complement => self.class_totals.iter().map(|&n| -(self.total - n + a * v).ln()).collect(),
        };
        let k = self.k as f64;
        let docs: f64 = self.doc_counts.iter().sum();
        self.log_prior = match (self.params.kind, self.params.priors) {
            (ModelKind::Complement, _) if self.k > 1 => vec![0.0; self.k],
            (_, PriorKind::Uniform) => vec![-k.ln(); self.k],
            (_, PriorKind::Given) => self.classes.iter().map(|c| self.params.given_priors[c].ln()).collect(),
            (_, PriorKind::Learned) => {
                if docs == 0.0 {
                    vec![-k.ln(); self.k]
                } else {
                    self.doc_counts.iter().map(|&d| d.ln() - docs.ln()).collect()
                }
            }
        };
    }
}

/// The cached log weight of a cell with count `n` in a row totalling `row_total`.
#[inline]
fn cell_weight(kind: ModelKind, alpha: f64, n: f64, row_total: f64) -> f64 {
    match kind {
        ModelKind::Multinomial => (n + alpha).ln(),
        ModelKind::Complement => -(row_total - n + alpha).ln(),
    }
}

fn check_classes(classes: &[String]) -> Result<(), ModelError> {
    if classes.is_empty() {
        return Err(ModelError::NoClasses);
    }
    let mut seen = std::collections::HashSet::new();
    for c in classes {
        if !seen.insert(c) {
            return Err(ModelError::DuplicateClass(c.clone()));
        }
    }
    Ok(())
}

/// Label weights are multiples of 1/16 up to 64; term weights (possibly
/// aggregated) are multiples of 1/16 up to 2^24.
fn check_weights(bag: &TermBag, weight: f64) -> Result<(), ModelError> {
    if !is_quantum_multiple(weight) || weight > MAX_WEIGHT {
        return Err(ModelError::BadWeight(weight));
    }
    for (_, w) in bag.iter() {
        if !is_quantum_multiple(w) || w > 16_777_216.0 {
            return Err(ModelError::BadWeight(w));
        }
    }
    Ok(())
}

#[inline]
fn is_quantum_multiple(w: f64) -> bool {
    let q = w / WEIGHT_QUANTUM;
    w.is_finite() && w > 0.0 && q == q.trunc()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::{Settings, VocabularyKind};

    pub(crate) fn bag(terms: &[&str]) -> TermBag {
        TermBag::from_pairs(terms.iter().map(|t| (*t, 1.0)))
    }

    fn model(classes: &[&str]) -> Model {
        let s = Settings::defaults();
        Model::new(
            NbParams::multinomial(1.0),
            s.analyzer,
            classes.iter().map(|c| c.to_string()).collect(),
            Vocabulary::new(VocabularyKind::Interned, 1000, 0),
        )
        .unwrap()
    }

    fn records() -> Vec<(Vec<&'static str>, &'static str, f64)> {
        vec![
            (vec!["refund", "label", "refund"], "returns", 1.0),
            (vec!["parcel", "late", "courier"], "shipping", 1.0),
            (vec!["refund", "card", "charge"], "billing", 2.0),
            (vec!["password", "login"], "access", 0.5),
            (vec!["courier", "lost", "parcel", "<num>"], "shipping", 1.0),
            (vec!["label", "return", "box"], "returns", 1.5),
        ]
    }

    #[test]
    fn incremental_in_any_order_equals_batch() {
        let classes = ["access", "billing", "returns", "shipping"];
        let mut a = model(&classes);
        for (t, c, w) in records() {
            a.learn(&bag(&t), c, w).unwrap();
        }
        // Reverse order, and a rotation: same counts bit for bit.
        let mut b = model(&classes);
        for (t, c, w) in records().into_iter().rev() {
            b.learn(&bag(&t), c, w).unwrap();
        }
        let mut r = records();
        r.rotate_left(2);
        let mut c = model(&classes);
        for (t, cl, w) in r {
            c.learn(&bag(&t), cl, w).unwrap();
        }
        assert_eq!(a.term_counts(), b.term_counts());
        assert_eq!(a.term_counts(), c.term_counts());
        assert_eq!(a.doc_counts, b.doc_counts);
        assert_eq!(a.fingerprint(), b.fingerprint());
        assert_eq!(a.fingerprint(), c.fingerprint());
        // The batch: the count matrix summed directly from the records.
        let mut batch: BTreeMap<String, Vec<f64>> = BTreeMap::new();
        let mut docs = vec![0.0; classes.len()];
        for (t, cl, w) in records() {
            let ci = classes.iter().position(|c| *c == cl).unwrap();
            docs[ci] += w;
            for term in t {
                batch.entry(term.to_string()).or_insert_with(|| vec![0.0; classes.len()])[ci] += w;
            }
        }
        assert_eq!(a.term_counts(), batch);
        assert_eq!(a.doc_counts, docs);
    }

    #[test]
    fn unlearn_restores_exactly() {
        let classes = ["access", "billing", "returns", "shipping"];
        let mut a = model(&classes);
        for (t, c, w) in records() {
            a.learn(&bag(&t), c, w).unwrap();
        }
        let before = a.clone();
        let extra = bag(&["brand", "new", "words", "refund"]);
        a.learn(&extra, "billing", 1.5).unwrap();
        assert_ne!(a.fingerprint(), before.fingerprint());
        a.unlearn(&extra, "billing", 1.5).unwrap();
        assert_eq!(a.fingerprint(), before.fingerprint());
        assert_eq!(a.term_counts(), before.term_counts());
        assert_eq!(a.vocabulary_size(), before.vocabulary_size());
        assert_eq!(a.norm, before.norm);
        assert_eq!(a.log_prior, before.log_prior);
    }

    #[test]
    fn correction_equals_learning_the_right_class_alone() {
        let classes = ["billing", "returns"];
        let r = bag(&["refund", "card"]);
        let mut a = model(&classes);
        a.learn(&r, "returns", 1.0).unwrap();
        a.unlearn(&r, "returns", 1.0).unwrap();
        a.learn(&r, "billing", 1.0).unwrap();
        let mut b = model(&classes);
        b.learn(&r, "billing", 1.0).unwrap();
        assert_eq!(a.fingerprint(), b.fingerprint());
    }

    #[test]
    fn unlearn_of_something_not_learned_is_refused_and_changes_nothing() {
        let mut a = model(&["a", "b"]);
        a.learn(&bag(&["x", "y"]), "a", 1.0).unwrap();
        let fp = a.fingerprint();
        assert_eq!(a.unlearn(&bag(&["x", "y"]), "b", 1.0), Err(ModelError::NotLearned { class: "b".into() }));
        assert_eq!(a.unlearn(&bag(&["x", "z"]), "a", 1.0), Err(ModelError::NotLearned { class: "a".into() }));
        assert_eq!(a.unlearn(&bag(&["x", "x"]), "a", 1.0), Err(ModelError::NotLearned { class: "a".into() }));
        assert_eq!(a.fingerprint(), fp);
    }

    #[test]
    fn bad_weights_and_unknown_classes_are_refused() {
        let mut a = model(&["a"]);
        assert_eq!(a.learn(&bag(&["x"]), "a", 0.3), Err(ModelError::BadWeight(0.3)));
        assert_eq!(a.learn(&bag(&["x"]), "a", 0.0), Err(ModelError::BadWeight(0.0)));
        assert_eq!(a.learn(&bag(&["x"]), "zz", 1.0), Err(ModelError::UnknownClass("zz".into())));
        assert!(a.is_empty());
    }

    #[test]
    fn full_vocabulary_drops_new_terms_and_counts_them() {
        let s = Settings::defaults();
        let mut m = Model::new(
            NbParams::multinomial(1.0),
            s.analyzer,
            vec!["a".into()],
            Vocabulary::new(VocabularyKind::Interned, 2, 0),
        )
        .unwrap();
        let out = m.learn(&bag(&["x", "y", "z", "x"]), "a", 1.0).unwrap();
        assert_eq!(out, LearnOutcome { dropped_terms: 1, new_terms: 2 });
        assert_eq!(m.vocabulary_size(), 2);
        // Unlearning the same record skips the term that was dropped.
        m.unlearn(&bag(&["x", "y", "z", "x"]), "a", 1.0).unwrap();
        assert!(m.is_empty());
    }

    #[test]
    fn add_and_reorder_classes_keep_counts() {
        let mut a = model(&["b", "a"]);
        a.learn(&bag(&["x"]), "a", 1.0).unwrap();
        a.learn(&bag(&["y", "y"]), "b", 1.0).unwrap();
        a.add_class("c").unwrap();
        a.learn(&bag(&["z"]), "c", 1.0).unwrap();
        a.reorder_classes(&["a".into(), "b".into(), "c".into()]).unwrap();
        let tc = a.term_counts();
        assert_eq!(tc["x"], vec![1.0, 0.0, 0.0]);
        assert_eq!(tc["y"], vec![0.0, 2.0, 0.0]);
        assert_eq!(tc["z"], vec![0.0, 0.0, 1.0]);
        assert_eq!(a.doc_counts, vec![1.0, 1.0, 1.0]);
        assert_eq!(a.add_class("a"), Err(ModelError::DuplicateClass("a".into())));
    }

    #[test]
    fn learning_cost_does_not_touch_other_rows() {
        // O(record length): a learn changes only the rows of its own terms.
        let mut a = model(&["a", "b"]);
        for i in 0..500 {
            a.learn(&bag(&[&format!("t{i}")]), "a", 1.0).unwrap();
        }
        let snapshot_rows: Vec<f64> = a.cells.logw_flat();
        a.learn(&bag(&["t7"]), "b", 1.0).unwrap();
        let changed = snapshot_rows.iter().zip(&a.cells.logw_flat()).filter(|(x, y)| x != y).count();
        assert_eq!(changed, 1, "multinomial: one cell of one row");
    }
}
