//! The model serving seam: an immutable `ModelView` behind `ArcSwap`, loaded once at start; a later reload or learner publishes a new view and each record is scored against exactly one.

use std::path::Path;
use std::sync::Arc;

use arc_swap::ArcSwap;
use serde::Serialize;

use crate::error::SnapshotError;
use crate::model::snapshot::{self, SnapshotMeta};
use crate::model::Model;
use crate::settings::AnalyzerSettings;

/// One immutable model as served: never mutated once published.
#[derive(Debug)]
pub struct ModelView {
    pub model: Model,
    pub meta: SnapshotMeta,
    /// Hex checksum of the snapshot file the view came from.
    pub checksum: String,
    /// The model's classes, shared so outputs can name them without copying.
    pub classes: Vec<Arc<str>>,
    pub source: String,
}

impl ModelView {
    pub fn new(model: Model, meta: SnapshotMeta, checksum: String, source: String) -> ModelView {
        let classes = model.classes().iter().map(|c| Arc::<str>::from(c.as_str())).collect();
        ModelView { model, meta, checksum, classes, source }
    }

    /// Load and validate a snapshot (refused whole if damaged or built with other analyzer settings).
    pub fn load(path: &Path, analyzer: &AnalyzerSettings) -> Result<ModelView, SnapshotError> {
        let loaded = snapshot::read(path, Some(analyzer))?;
        Ok(ModelView::new(loaded.model, loaded.meta, loaded.checksum, path.display().to_string()))
    }

    /// The model-info JSON of the admin endpoint.
    pub fn info(&self) -> ModelInfo {
        ModelInfo {
            model_version: self.meta.model_version.clone(),
            created_at: self.meta.created_at.clone(),
            checksum: self.checksum.clone(),
            source: self.source.clone(),
            classes: self.model.classes().to_vec(),
            documents: self.model.documents(),
            vocabulary_size: self.model.vocabulary_size(),
            labels_learned: self.meta.labels_learned,
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct ModelInfo {
    pub model_version: String,
    pub created_at: String,
    pub checksum: String,
    pub source: String,
    pub classes: Vec<String>,
    pub documents: f64,
    pub vocabulary_size: usize,
    pub labels_learned: u64,
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
