//! The model serving seam: an immutable `ModelView` behind `ArcSwap`, loaded once at start; a later reload or learner publishes a new view and each record is scored against exactly one.

use std::path::Path;
use std::sync::Arc;

use arc_swap::ArcSwap;
use serde::Serialize;

use crate::error::SnapshotError;
use crate::model::snapshot::{self, served_version, SnapshotMeta};
use crate::model::Model;
use crate::settings::AnalyzerSettings;

/// One immutable model as served: never mutated once published.
///
/// Its version is `<base>+<applied>`: the first 12 hex digits of the base
/// model file's checksum, and the number of labels learned on top of that
/// file. Replicas that fold the same label log on the same base serve the
/// same version for the same counts. `meta.model_version` holds it; the
/// file's own version string (from `train --model-version`) is `file_version`.
#[derive(Debug)]
pub struct ModelView {
    pub model: Model,
    pub meta: SnapshotMeta,
    /// Hex checksum of the snapshot file the counts were loaded from.
    pub checksum: String,
    /// Hex checksum of the base model file.
    pub base: String,
    /// Labels learned on top of the base file.
    pub applied: u64,
    pub file_version: String,
    /// The model's classes, shared so outputs can name them without copying.
    pub classes: Vec<Arc<str>>,
    pub source: String,
}

impl ModelView {
    /// A view of a model loaded from a file (a base, or a snapshot of one).
    pub fn new(model: Model, mut meta: SnapshotMeta, checksum: String, source: String) -> ModelView {
        let (base, base_labels) = meta.lineage(&checksum);
        let base = base.to_string();
        let applied = meta.labels_learned.saturating_sub(base_labels);
        let file_version = std::mem::replace(&mut meta.model_version, served_version(&base, applied));
        let classes = model.classes().iter().map(|c| Arc::<str>::from(c.as_str())).collect();
        ModelView { model, meta, checksum, base, applied, file_version, classes, source }
    }

    /// A view of the learner's counts on top of `lineage`'s base file.
    pub fn learned(model: Model, mut meta: SnapshotMeta, lineage: &Lineage) -> ModelView {
        let applied = meta.labels_learned.saturating_sub(lineage.base_labels);
        meta.model_version = served_version(&lineage.base, applied);
        meta.base = lineage.base.clone();
        meta.base_labels = lineage.base_labels;
        let classes = model.classes().iter().map(|c| Arc::<str>::from(c.as_str())).collect();
        ModelView {
            model,
            meta,
            checksum: lineage.checksum.clone(),
            base: lineage.base.clone(),
            applied,
            file_version: lineage.file_version.clone(),
            classes,
            source: lineage.source.clone(),
        }
    }

    /// Where this view's counts come from.
    pub fn lineage(&self) -> Lineage {
        Lineage {
            base: self.base.clone(),
            base_labels: self.base_labels(),
            checksum: self.checksum.clone(),
            file_version: self.file_version.clone(),
            source: self.source.clone(),
        }
    }

    /// Load and validate a snapshot (refused whole if damaged or built with other analyzer settings).
    pub fn load(path: &Path, analyzer: &AnalyzerSettings) -> Result<ModelView, SnapshotError> {
        let loaded = snapshot::read(path, Some(analyzer))?;
        Ok(ModelView::new(loaded.model, loaded.meta, loaded.checksum, path.display().to_string()))
    }

    /// The label count of the base file (what `applied` is counted from).
    pub fn base_labels(&self) -> u64 {
        self.meta.labels_learned.saturating_sub(self.applied)
    }

    /// The model-info JSON of the admin endpoint.
    pub fn info(&self) -> ModelInfo {
        ModelInfo {
            model_version: self.meta.model_version.clone(),
            base: self.base.clone(),
            labels_applied: self.applied,
            file_version: self.file_version.clone(),
            created_at: self.meta.created_at.clone(),
            checksum: self.checksum.clone(),
            source: self.source.clone(),
            classes: self.model.classes().to_vec(),
            documents: self.model.documents(),
            vocabulary_size: self.model.vocabulary_size(),
            labels_learned: self.meta.labels_learned,
            label_offsets: self.meta.label_offsets.clone(),
            fingerprint: None,
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct ModelInfo {
    pub model_version: String,
    pub base: String,
    pub labels_applied: u64,
    pub file_version: String,
    pub created_at: String,
    pub checksum: String,
    pub source: String,
    pub classes: Vec<String>,
    pub documents: f64,
    pub vocabulary_size: usize,
    pub labels_learned: u64,
    pub label_offsets: crate::model::snapshot::LabelOffsets,
    /// The count fingerprint (only when asked for: it hashes every row).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fingerprint: Option<String>,
}

/// Where a model's counts come from: the base file (checksum and label count)
/// and the file actually loaded (the base itself, or a snapshot built on it).
#[derive(Debug, Clone, PartialEq)]
pub struct Lineage {
    pub base: String,
    pub base_labels: u64,
    pub checksum: String,
    pub file_version: String,
    pub source: String,
}

/// Where scorers read the current view; `publish` swaps it atomically.
#[derive(Debug, Clone)]
pub struct ModelHandle(Arc<ArcSwap<ModelView>>);

impl ModelHandle {
    pub fn new(view: ModelView) -> ModelHandle {
        ModelHandle(Arc::new(ArcSwap::from_pointee(view)))
    }

    /// The current view; hold it for the whole of one record.
    pub fn current(&self) -> Arc<ModelView> {
        self.0.load_full()
    }

    /// Replace the served view; records already being scored keep the old one.
    pub fn publish(&self, view: ModelView) {
        self.0.store(Arc::new(view));
    }
}
