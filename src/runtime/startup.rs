//! Which model file the service starts from: the base model file, or the snapshot built on top of it when one exists and is sound.

use std::path::Path;

use crate::error::SnapshotError;
use crate::metrics::Metrics;
use crate::model::snapshot;
use crate::runtime::model_view::ModelView;
use crate::settings::Settings;

/// Load `service.model`; if `snapshot.path` holds a snapshot folded on top of
/// exactly that file, load the snapshot instead (it includes the label-log
/// offsets to replay from). A snapshot that is damaged, refused or built on
/// another base is passed over with a warning: the base file is what the
/// operator asked for, and the label log rebuilds what the snapshot held.
pub fn initial_view(settings: &Settings, metrics: &Metrics) -> Result<ModelView, SnapshotError> {
    let base_path = Path::new(&settings.service.model);
    let base = snapshot::read(base_path, Some(&settings.analyzer))?;
    metrics.model_loads.with_label_values(&["ok"]).inc();
    let snap_path = Path::new(&settings.snapshot.path);
    if !settings.snapshot.path.is_empty() && snap_path.exists() && snap_path != base_path {
        match snapshot::read(snap_path, Some(&settings.analyzer)) {
            Ok(snap) if snap.meta.base == base.checksum => {
                metrics.model_loads.with_label_values(&["ok"]).inc();
                tracing::info!(
                    "starting from snapshot {} ({} labels on top of {})",
                    snap_path.display(),
                    snap.meta.labels_learned.saturating_sub(snap.meta.base_labels),
                    base_path.display()
                );
                return Ok(ModelView::new(snap.model, snap.meta, snap.checksum, snap_path.display().to_string()));
            }
            Ok(_) => tracing::warn!(
                "snapshot {} was built on another model file than {}: starting from the model file",
                snap_path.display(),
                base_path.display()
            ),
            Err(e) => {
                metrics.model_loads.with_label_values(&["refused"]).inc();
                tracing::warn!("snapshot {} refused ({e}): starting from {}", snap_path.display(), base_path.display());
            }
        }
    }
    Ok(ModelView::new(base.model, base.meta, base.checksum, base_path.display().to_string()))
}
