//! The learner: one thread that owns the working model, folds the label log into it in log order, publishes a read-only view to the scorers within a bounded interval, writes snapshots, and reloads model files (load, replay the log from the file's offsets, then swap).
//!
//! Scoring never waits on it: scorers read whatever view was published last
//! (`ModelHandle`), and the learner builds the next one on its own thread.
//! A reload is validated off the scoring path; while the new file's counts
//! catch up with the label log, the old view keeps serving, and the swap is
//! one atomic publish.

use std::borrow::Cow;
use std::collections::BTreeSet;
use std::path::PathBuf;
use std::sync::mpsc;
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use tokio::sync::{oneshot, watch};

use crate::error::SnapshotError;
use crate::io::headers as h;
use crate::io::message::{OutKind, Outgoing};
use crate::learn::fold::Predicted;
use crate::learn::{FoldOutcome, Folder, UnknownClassPolicy};
use crate::metrics::Metrics;
use crate::model::snapshot::{self, served_version};
use crate::runtime::label_log::{describe_offsets, LabelLog, LabelMsg, LogEvent};
use crate::runtime::model_view::{Lineage, ModelHandle, ModelView};
use crate::settings::{AnalyzerSettings, FieldSetting, Settings, UnknownClasses};
use crate::text::Analyzer;

/// The longest a poll of the label log blocks, so commands are answered promptly.
const POLL: Duration = Duration::from_millis(50);

/// Told about what the learner does (drift statistics, status page).
pub trait LearnObserver: Send + Sync {
    /// A label was learned. `predicted` is the model's class for the record just
    /// before learning it (first labels on a trained model only); `delay_secs`
    /// the time from scoring the record to folding the label, when known.
    fn learned(&self, _class: &str, _predicted: Option<&Predicted>, _delay_secs: Option<f64>) {}
    fn published(&self, _applied: u64) {}
    fn snapshot_written(&self) {}
    fn reloaded(&self) {}
}

/// How the learner runs, from settings.
#[derive(Debug, Clone)]
pub struct LearnerConfig {
    pub publish_interval: Duration,
    pub snapshot_path: Option<PathBuf>,
    pub snapshot_interval: Duration,
    pub analyzer: AnalyzerSettings,
    pub fields: Vec<FieldSetting>,
    pub policy: UnknownClassPolicy,
    pub dead_letter_topic: String,
}

impl LearnerConfig {
    pub fn from_settings(s: &Settings) -> LearnerConfig {
        LearnerConfig {
            publish_interval: Duration::from_millis(s.learning.publish_interval_ms),
            snapshot_path: (!s.snapshot.path.is_empty()).then(|| PathBuf::from(&s.snapshot.path)),
            snapshot_interval: Duration::from_millis(s.snapshot.interval_ms),
            analyzer: s.analyzer.clone(),
            fields: s.input.fields.clone(),
            policy: match s.learning.unknown_classes {
                UnknownClasses::Reject => UnknownClassPolicy::Reject,
                UnknownClasses::Add => UnknownClassPolicy::Add,
            },
            dead_letter_topic: s.dead_letter.topic.clone(),
        }
    }
}

/// The answer to a reload or snapshot request: the served version or file written, or why not.
pub type Reply = oneshot::Sender<Result<String, String>>;

enum Command {
    Reload { path: PathBuf, reply: Option<Reply> },
    Snapshot { reply: Option<Reply> },
    Stop,
}

/// The service's handle on the learner thread.
pub struct LearnerHandle {
    tx: Mutex<mpsc::Sender<Command>>,
    caught_up: watch::Receiver<bool>,
    join: Mutex<Option<JoinHandle<()>>>,
}

impl LearnerHandle {
    /// Load `path`, replay the label log from its offsets, then swap it in.
    /// The answer comes once the new model serves (or was refused).
    pub fn reload(&self, path: PathBuf) -> oneshot::Receiver<Result<String, String>> {
        let (tx, rx) = oneshot::channel();
        self.send(Command::Reload { path, reply: Some(tx) });
        rx
    }

    /// Write a snapshot now.
    pub fn snapshot(&self) -> oneshot::Receiver<Result<String, String>> {
        let (tx, rx) = oneshot::channel();
        self.send(Command::Snapshot { reply: Some(tx) });
        rx
    }

    fn send(&self, c: Command) {
        let _ = self.tx.lock().expect("learner channel").send(c);
    }

    /// Wait until the label log has been read to its end once, at most `limit`.
    pub async fn wait_caught_up(&self, limit: Duration) -> bool {
        let mut rx = self.caught_up.clone();
        let ok = matches!(tokio::time::timeout(limit, rx.wait_for(|c| *c)).await, Ok(Ok(_)));
        ok
    }

    /// Stop the thread: a last snapshot is written first. Blocks until it ends.
    pub fn stop(&self) {
        self.send(Command::Stop);
        if let Some(j) = self.join.lock().expect("learner join").take() {
            let _ = j.join();
        }
    }
}

/// What the learner needs from the service.
pub struct LearnerParts {
    /// The view being served at start; the learner continues from its counts.
    pub start: Arc<ModelView>,
    pub log: Box<dyn LabelLog>,
    pub models: ModelHandle,
    pub metrics: Arc<Metrics>,
    pub observer: Option<Arc<dyn LearnObserver>>,
    /// Where refused label events go (to the dead-letter destination).
    pub dead_letters: Option<tokio::sync::mpsc::UnboundedSender<Outgoing>>,
}

/// Start the learner thread. It seeks the log to the start view's offsets and reads on.
pub fn start(parts: LearnerParts, cfg: LearnerConfig) -> std::io::Result<LearnerHandle> {
    let analyzer = Analyzer::new(&cfg.analyzer).map_err(std::io::Error::other)?;
    let (tx, rx) = mpsc::channel();
    let (caught_tx, caught_rx) = watch::channel(false);
    let mut folder =
        Folder::new(parts.start.model.clone(), &parts.start.meta, analyzer.clone(), cfg.fields.clone(), cfg.policy);
    folder.set_prequential(parts.observer.is_some());
    let learner = Learner {
        folder,
        lineage: parts.start.lineage(),
        analyzer,
        log: parts.log,
        models: parts.models,
        metrics: parts.metrics,
        observer: parts.observer,
        dead: parts.dead_letters,
        cfg,
        dirty: false,
        unpublished: Vec::new(),
        last_publish: Instant::now(),
        pending_ends: BTreeSet::new(),
        catch_up: None,
        caught_tx,
        last_snapshot: Instant::now(),
        snapshotted: None,
        writer: None,
        last_error_log: None,
    };
    let join = std::thread::Builder::new().name("sieveline-learner".into()).spawn(move || learner.run(rx))?;
    Ok(LearnerHandle { tx: Mutex::new(tx), caught_up: caught_rx, join: Mutex::new(Some(join)) })
}

/// A catch-up in progress: after start (views are published as usual) or
/// after a reload (the old view serves until the log is read to its end).
struct CatchUp {
    reload: bool,
    reply: Option<Reply>,
    started: Instant,
}

struct Learner {
    folder: Folder,
    lineage: Lineage,
    analyzer: Analyzer,
    log: Box<dyn LabelLog>,
    models: ModelHandle,
    metrics: Arc<Metrics>,
    observer: Option<Arc<dyn LearnObserver>>,
    dead: Option<tokio::sync::mpsc::UnboundedSender<Outgoing>>,
    cfg: LearnerConfig,
    /// Labels applied since the last publish.
    dirty: bool,
    /// Log timestamps (ms) of the labels applied since the last publish.
    unpublished: Vec<i64>,
    last_publish: Instant,
    /// Partitions not yet read to their end since the last seek.
    pending_ends: BTreeSet<(String, i32)>,
    catch_up: Option<CatchUp>,
    caught_tx: watch::Sender<bool>,
    last_snapshot: Instant,
    /// (labels learned, offsets) of the last snapshot written.
    snapshotted: Option<(u64, String)>,
    writer: Option<JoinHandle<()>>,
    last_error_log: Option<Instant>,
}

impl Learner {
    fn run(mut self, rx: mpsc::Receiver<Command>) {
        self.seek_and_catch_up(false, None);
        loop {
            match rx.try_recv() {
                Ok(Command::Stop) | Err(mpsc::TryRecvError::Disconnected) => break,
                Ok(Command::Reload { path, reply }) => self.reload(path, reply),
                Ok(Command::Snapshot { reply }) => {
                    let r = self.write_snapshot(true);
                    if let Some(reply) = reply {
                        let _ = reply.send(r);
                    }
                }
                Err(mpsc::TryRecvError::Empty) => {}
            }
            let timeout = if self.dirty && self.publishing() {
                (self.last_publish + self.cfg.publish_interval).saturating_duration_since(Instant::now()).min(POLL)
            } else {
                POLL
            };
            match self.log.poll(timeout) {
                Ok(LogEvent::Message(m)) => self.apply(m),
                Ok(LogEvent::End { topic, partition }) => {
                    self.pending_ends.remove(&(topic, partition));
                    if self.pending_ends.is_empty() {
                        self.caught_up();
                    }
                }
                Ok(LogEvent::Idle) => {}
                Err(e) => {
                    self.metrics.label_log_errors.inc();
                    if self.last_error_log.is_none_or(|t| t.elapsed() >= Duration::from_secs(10)) {
                        tracing::warn!("{e}; retrying");
                        self.last_error_log = Some(Instant::now());
                    }
                    std::thread::sleep(Duration::from_millis(200));
                }
            }
            if self.dirty && self.publishing() && self.last_publish.elapsed() >= self.cfg.publish_interval {
                self.publish();
            }
            if self.snapshot_due() {
                let _ = self.write_snapshot(false);
            }
        }
        if self.dirty && self.publishing() {
            self.publish();
        }
        if let Some(c) = self.catch_up.take() {
            if let Some(r) = c.reply {
                let _ = r.send(Err("the service is stopping".into()));
            }
        }
        if self.cfg.snapshot_path.is_some() {
            if let Err(e) = self.write_snapshot(true) {
                tracing::warn!("last snapshot: {e}");
            }
        }
    }

    /// Views go out unless a reload is catching up (the old view serves meanwhile).
    fn publishing(&self) -> bool {
        !self.catch_up.as_ref().is_some_and(|c| c.reload)
    }

    fn seek_and_catch_up(&mut self, reload: bool, reply: Option<Reply>) {
        let offsets = self.folder.offsets().clone();
        if let Err(e) = self.log.seek(&offsets) {
            self.metrics.label_log_errors.inc();
            tracing::warn!("{e}");
        }
        tracing::info!("{}: reading from {}", self.log.describe(), describe_offsets(&offsets));
        self.pending_ends = self.log.partitions().into_iter().collect();
        self.metrics.label_log_caught_up.set(0);
        self.catch_up = Some(CatchUp { reload, reply, started: Instant::now() });
    }

    fn caught_up(&mut self) {
        let Some(c) = self.catch_up.take() else { return };
        tracing::info!(
            "label log read to its end in {:.2?} ({} labels learned on top of {})",
            c.started.elapsed(),
            self.folder.labels_learned().saturating_sub(self.lineage.base_labels),
            &self.lineage.base[..12.min(self.lineage.base.len())]
        );
        self.metrics.label_log_caught_up.set(1);
        if c.reload || self.dirty {
            self.publish();
        }
        let _ = self.caught_tx.send(true);
        if c.reload {
            if let Some(o) = &self.observer {
                o.reloaded();
            }
        }
        if let Some(r) = c.reply {
            let _ = r.send(Ok(self.models.current().meta.model_version.clone()));
        }
    }

    fn apply(&mut self, m: LabelMsg) {
        self.metrics.labels_read.inc();
        match self.folder.apply(&m.topic, m.partition, m.offset, &m.payload) {
            FoldOutcome::Learned { class, corrected_from, predicted, scored_ms, .. } => {
                self.metrics.labels_learned.inc();
                if corrected_from.is_some() {
                    self.metrics.label_corrections.inc();
                }
                if let Some(o) = &self.observer {
                    let delay = scored_ms.map(|t| (crate::clock::unix_millis() - t).max(0) as f64 / 1000.0);
                    o.learned(&class, predicted.as_ref(), delay);
                }
                self.dirty = true;
                self.unpublished.push(m.timestamp_ms.unwrap_or_else(crate::clock::unix_millis));
            }
            FoldOutcome::Rejected(r) => {
                // The offsets moved on: the next view records them.
                self.dirty = true;
                self.metrics.labels_rejected.with_label_values(&[r.reason()]).inc();
                tracing::debug!("label {}/{}@{} refused: {r}", m.topic, m.partition, m.offset);
                if let Some(tx) = &self.dead {
                    let _ = tx.send(label_dead_letter(&self.cfg.dead_letter_topic, &m, r.reason(), &r.to_string()));
                }
            }
            FoldOutcome::AlreadyFolded => {}
        }
    }

    fn publish(&mut self) {
        let view = ModelView::learned(self.folder.model().clone(), self.folder.meta(String::new()), &self.lineage);
        self.metrics.model_classes.set(view.classes.len() as i64);
        self.metrics.model_labels_applied.set(view.applied as i64);
        let applied = view.applied;
        self.models.publish(view);
        self.metrics.model_publishes.inc();
        let now = crate::clock::unix_millis();
        for ts in self.unpublished.drain(..) {
            self.metrics.label_publish_delay.observe((now - ts).max(0) as f64 / 1000.0);
        }
        self.dirty = false;
        self.last_publish = Instant::now();
        if let Some(o) = &self.observer {
            o.published(applied);
        }
    }

    fn reload(&mut self, path: PathBuf, reply: Option<Reply>) {
        let loaded = match snapshot::read(&path, Some(&self.cfg.analyzer)) {
            Ok(l) => l,
            Err(e) => {
                self.metrics.model_loads.with_label_values(&["refused"]).inc();
                let msg = refusal(&e);
                tracing::warn!("model reload refused, the served model stays: {msg}");
                if let Some(r) = reply {
                    let _ = r.send(Err(msg));
                }
                return;
            }
        };
        self.metrics.model_loads.with_label_values(&["ok"]).inc();
        let view = ModelView::new(loaded.model, loaded.meta, loaded.checksum, path.display().to_string());
        tracing::info!("model reload: {} (version {}) loaded; replaying the label log", view.source, view.meta.model_version);
        let mut folder = Folder::new(view.model, &view.meta, self.analyzer.clone(), self.cfg.fields.clone(), self.cfg.policy);
        folder.set_prequential(self.observer.is_some());
        self.lineage = Lineage {
            base: view.base,
            base_labels: view.meta.labels_learned.saturating_sub(view.applied),
            checksum: view.checksum,
            file_version: view.file_version,
            source: view.source,
        };
        self.folder = folder;
        self.unpublished.clear();
        self.dirty = true;
        self.snapshotted = None;
        if let Some(c) = self.catch_up.take() {
            if let Some(r) = c.reply {
                let _ = r.send(Err("superseded by a newer reload".into()));
            }
        }
        self.seek_and_catch_up(true, reply);
    }

    fn snapshot_due(&self) -> bool {
        self.cfg.snapshot_path.is_some()
            && self.last_snapshot.elapsed() >= self.cfg.snapshot_interval
            && self.writer.as_ref().is_none_or(|w| w.is_finished())
            && self.changed_since_snapshot()
    }

    fn state_key(&self) -> (u64, String) {
        (self.folder.labels_learned(), describe_offsets(self.folder.offsets()))
    }

    fn changed_since_snapshot(&self) -> bool {
        self.snapshotted.as_ref() != Some(&self.state_key())
    }

    /// Write a snapshot of the working counts and the offsets they include;
    /// in the background unless `wait`. Skipped when nothing changed.
    fn write_snapshot(&mut self, wait: bool) -> Result<String, String> {
        let Some(path) = self.cfg.snapshot_path.clone() else { return Err("snapshot.path is not set".into()) };
        if let Some(w) = self.writer.take() {
            let _ = w.join();
        }
        self.last_snapshot = Instant::now();
        if !self.changed_since_snapshot() && path.exists() {
            return Ok(path.display().to_string());
        }
        let key = self.state_key();
        let model = self.folder.model().clone();
        let mut meta = self.folder.meta(String::new());
        meta.base = self.lineage.base.clone();
        meta.base_labels = self.lineage.base_labels;
        meta.model_version = served_version(&self.lineage.base, meta.labels_learned.saturating_sub(meta.base_labels));
        let metrics = self.metrics.clone();
        let observer = self.observer.clone();
        let shown = path.display().to_string();
        let write = move || -> Result<String, String> {
            let started = Instant::now();
            match snapshot::write(&path, &model, &meta) {
                Ok(_) => {
                    metrics.snapshots.with_label_values(&["ok"]).inc();
                    metrics.last_snapshot.set(crate::clock::unix_millis() / 1000);
                    tracing::info!("snapshot {} written in {:.2?} ({})", path.display(), started.elapsed(), meta.model_version);
                    if let Some(o) = observer {
                        o.snapshot_written();
                    }
                    Ok(path.display().to_string())
                }
                Err(e) => {
                    metrics.snapshots.with_label_values(&["error"]).inc();
                    tracing::warn!("snapshot {} failed: {e}", path.display());
                    Err(e.to_string())
                }
            }
        };
        self.snapshotted = Some(key);
        if wait {
            return write();
        }
        match std::thread::Builder::new().name("sieveline-snapshot".into()).spawn(move || {
            let _ = write();
        }) {
            Ok(j) => {
                self.writer = Some(j);
                Ok(shown)
            }
            Err(e) => {
                self.snapshotted = None;
                Err(e.to_string())
            }
        }
    }
}

/// A refused model file, said in one line with its cause.
fn refusal(e: &SnapshotError) -> String {
    let mut msg = e.to_string();
    let mut src = std::error::Error::source(e);
    while let Some(s) = src {
        msg.push_str(": ");
        msg.push_str(&s.to_string());
        src = s.source();
    }
    msg
}

/// A refused label event as a dead letter: its own bytes and key, the reason, and where it came from.
pub fn label_dead_letter(topic: &str, m: &LabelMsg, reason: &'static str, detail: &str) -> Outgoing {
    let headers: Vec<(Cow<'static, str>, Vec<u8>)> = vec![
        (Cow::Borrowed(h::REASON), reason.as_bytes().to_vec()),
        (Cow::Borrowed(h::ERROR), detail.as_bytes().to_vec()),
        (Cow::Borrowed(h::SOURCE_TOPIC), m.topic.as_bytes().to_vec()),
        (Cow::Borrowed(h::SOURCE_PARTITION), m.partition.to_string().into_bytes()),
        (Cow::Borrowed(h::SOURCE_OFFSET), m.offset.to_string().into_bytes()),
    ];
    Outgoing {
        topic: topic.to_string(),
        key: m.key.clone(),
        payload: m.payload.clone(),
        headers,
        kind: OutKind::DeadLetter { reason },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::Vocabulary;
    use crate::model::snapshot::SnapshotMeta;
    use crate::model::{Model, NbParams};
    use crate::runtime::label_log::ChannelLabelLog;
    use std::path::Path;
    use crate::text::TermBag;

    fn base_model(s: &Settings) -> Model {
        let mut m = Model::new(
            NbParams::multinomial(1.0),
            s.analyzer.clone(),
            vec!["billing".into(), "returns".into()],
            Vocabulary::new(s.model.vocabulary, 10_000, 0),
        )
        .unwrap();
        m.learn(&TermBag::from_pairs([("card", 1.0), ("charged", 1.0)]), "billing", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("refund", 1.0), ("label", 1.0)]), "returns", 1.0).unwrap();
        m
    }

    fn event(id: &str, class: &str, body: &str) -> Vec<u8> {
        serde_json::to_vec(&serde_json::json!({"id": id, "class": class, "fields": {"body": body}})).unwrap()
    }

    async fn wait_version(models: &ModelHandle, want: &str) -> Arc<ModelView> {
        for _ in 0..200 {
            let v = models.current();
            if v.meta.model_version == want {
                return v;
            }
            tokio::time::sleep(Duration::from_millis(25)).await;
        }
        panic!("version {want} never served; serving {}", models.current().meta.model_version);
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn labels_are_published_snapshotted_and_reloads_are_validated() {
        let s = Settings::defaults();
        let dir = tempfile::tempdir().unwrap();
        let base_path = dir.path().join("base.svm");
        let base = base_model(&s);
        let base_sum = snapshot::write(&base_path, &base, &SnapshotMeta::fresh(&base, Some("b1".into()))).unwrap();
        let view = ModelView::load(&base_path, &s.analyzer).unwrap();
        assert_eq!(view.meta.model_version, format!("{}+0", &base_sum[..12]));
        let models = ModelHandle::new(view);
        let metrics = Arc::new(Metrics::new());
        let (tx, log) = ChannelLabelLog::new("labels");
        let (dead_tx, mut dead_rx) = tokio::sync::mpsc::unbounded_channel();
        let mut cfg = LearnerConfig::from_settings(&s);
        cfg.publish_interval = Duration::from_millis(20);
        cfg.snapshot_path = Some(dir.path().join("snap.svm"));
        cfg.snapshot_interval = Duration::from_secs(3600);
        let parts = LearnerParts {
            start: models.current(),
            log: Box::new(log),
            models: models.clone(),
            metrics: metrics.clone(),
            observer: None,
            dead_letters: Some(dead_tx),
        };
        let h = start(parts, cfg).unwrap();
        assert!(h.wait_caught_up(Duration::from_secs(5)).await);

        // Two labels and one refused event: the served version counts the two.
        tx.send(event("r1", "returns", "please refund the tent, return label attached")).unwrap();
        tx.send(b"{not json".to_vec()).unwrap();
        tx.send(event("r2", "billing", "my card was charged twice")).unwrap();
        let v = wait_version(&models, &format!("{}+2", &base_sum[..12])).await;
        let dl = tokio::time::timeout(Duration::from_secs(5), dead_rx.recv()).await.unwrap().unwrap();
        assert_eq!(dl.kind, OutKind::DeadLetter { reason: "malformed label" });
        assert_eq!(dl.header(h::SOURCE_OFFSET), Some(&b"1"[..]));
        assert_eq!(metrics.labels_rejected.with_label_values(&["malformed label"]).get(), 1);

        // The same events folded offline give the same counts.
        let mut offline = Folder::new(
            base.clone(),
            &SnapshotMeta::default(),
            Analyzer::new(&s.analyzer).unwrap(),
            s.input.fields.clone(),
            UnknownClassPolicy::Reject,
        );
        offline.apply("labels", 0, 0, &event("r1", "returns", "please refund the tent, return label attached"));
        offline.apply("labels", 0, 2, &event("r2", "billing", "my card was charged twice"));
        assert_eq!(v.model.fingerprint(), offline.model().fingerprint());

        // A snapshot records the base it was folded on and the offsets it includes.
        let written = h.snapshot().await.unwrap().unwrap();
        let snap = snapshot::read(Path::new(&written), Some(&s.analyzer)).unwrap();
        assert_eq!(snap.meta.base, base_sum);
        assert_eq!(snap.meta.label_offsets["labels"][&0], 3);
        assert_eq!(snap.model.fingerprint(), v.model.fingerprint());
        assert_eq!(snap.served_version(), v.meta.model_version);

        // A damaged file is refused and the served model stays.
        let bad = dir.path().join("bad.svm");
        let mut bytes = std::fs::read(&base_path).unwrap();
        let mid = bytes.len() / 2;
        bytes[mid] ^= 0xff;
        std::fs::write(&bad, &bytes).unwrap();
        assert!(h.reload(bad).await.unwrap().is_err());
        assert_eq!(models.current().meta.model_version, v.meta.model_version);
        assert_eq!(metrics.model_loads.with_label_values(&["refused"]).get(), 1);

        // A new base without offsets: the whole log is replayed on top, then it is served.
        let new_path = dir.path().join("new.svm");
        let mut newer = base_model(&s);
        newer.learn(&TermBag::from_pairs([("invoice", 1.0)]), "billing", 1.0).unwrap();
        let new_sum = snapshot::write(&new_path, &newer, &SnapshotMeta::fresh(&newer, None)).unwrap();
        let version = h.reload(new_path).await.unwrap().unwrap();
        assert_eq!(version, format!("{}+2", &new_sum[..12]));
        assert_eq!(models.current().meta.model_version, version);
        h.stop();
    }
}
