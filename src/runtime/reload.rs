//! Hot reload: `Reloader` loads and validates the model and/or the rules off the scoring path and swaps them in atomically (a refused file leaves the old one serving), one reload at a time; the coordinator task feeds it from the file watcher (debounced) and SIGHUP, and `POST /reload` calls it directly. The model step goes through the `ModelReloader` seam.

use std::path::PathBuf;
use std::sync::{Arc, OnceLock};
use std::time::Duration;

use futures::future::BoxFuture;
use futures::FutureExt;
use serde::Serialize;
use tokio_util::sync::CancellationToken;

use crate::error::SnapshotError;
use crate::metrics::Metrics;
use crate::rules::RulesError;
use crate::runtime::learner::LearnerHandle;
use crate::runtime::model_view::{ModelHandle, ModelInfo, ModelView};
use crate::runtime::rules_view::{RulesHandle, RulesInfo, RulesView};
use crate::runtime::watch::{Debouncer, Target, WatchFlags};
use crate::settings::{AnalyzerSettings, Settings};

/// Why a file was refused.
#[derive(Debug, thiserror::Error)]
pub enum ReloadError {
    #[error(transparent)]
    Model(#[from] SnapshotError),
    #[error(transparent)]
    Rules(#[from] RulesError),
    #[error("the reload task failed: {0}")]
    Task(String),
    /// Refused by the learner, with its reason.
    #[error("{0}")]
    Learner(String),
}

/// Loads, validates and publishes a model file, answering what it now serves.
///
/// This is the seam for model reloads. `PublishDirectly` loads the file and
/// publishes it as it is; an online learner implements this trait to replay
/// the label log from the file's offsets before publishing, and is installed
/// with `Service::set_model_reloader`. A refusal must leave the served model
/// untouched.
pub trait ModelReloader: Send + Sync {
    fn reload(&self, path: PathBuf) -> BoxFuture<'static, Result<ModelInfo, ReloadError>>;
}

/// The model reload without a learner: load and validate the snapshot on a
/// blocking thread (`ModelView::load` refuses a truncated, corrupt or foreign
/// file, or one built with other analyzer settings), then publish it.
pub struct PublishDirectly {
    pub model: ModelHandle,
    pub analyzer: AnalyzerSettings,
}

impl ModelReloader for PublishDirectly {
    fn reload(&self, path: PathBuf) -> BoxFuture<'static, Result<ModelInfo, ReloadError>> {
        let (handle, analyzer) = (self.model.clone(), self.analyzer.clone());
        async move {
            let view = tokio::task::spawn_blocking(move || ModelView::load(&path, &analyzer))
                .await
                .map_err(|e| ReloadError::Task(e.to_string()))??;
            let info = view.info();
            handle.publish(view);
            Ok(info)
        }
        .boxed()
    }
}

/// The model reload with online learning on: the learner loads and validates
/// the file, replays the label log from the file's offsets and publishes the
/// result in one swap (docs/learning.md); the answer comes once it serves.
pub struct ThroughLearner {
    /// Set once the learner runs (it starts after the reload coordinator).
    pub learner: Arc<OnceLock<Arc<LearnerHandle>>>,
    pub model: ModelHandle,
}

impl ModelReloader for ThroughLearner {
    fn reload(&self, path: PathBuf) -> BoxFuture<'static, Result<ModelInfo, ReloadError>> {
        let (learner, model) = (self.learner.get().cloned(), self.model.clone());
        async move {
            let learner = learner.ok_or_else(|| ReloadError::Task("the learner is not running yet".into()))?;
            match learner.reload(path).await {
                Ok(Ok(_version)) => Ok(model.current().info()),
                Ok(Err(reason)) => Err(ReloadError::Learner(reason)),
                Err(_) => Err(ReloadError::Task("the learner stopped before answering".into())),
            }
        }
        .boxed()
    }
}

/// Which files a reload concerns.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum What {
    Model,
    Rules,
    Both,
}

impl What {
    /// `?what=` of `POST /reload`: `model`, `rules`, `both`, or absent for both.
    pub fn parse(s: Option<&str>) -> Result<What, String> {
        match s {
            None | Some("both") => Ok(What::Both),
            Some("model") => Ok(What::Model),
            Some("rules") => Ok(What::Rules),
            Some(other) => Err(format!("what={other:?} is not known: use model, rules or both")),
        }
    }

    pub fn includes(self, t: Target) -> bool {
        matches!((self, t), (What::Both, _) | (What::Model, Target::Model) | (What::Rules, Target::Rules))
    }
}

impl From<Target> for What {
    fn from(t: Target) -> What {
        match t {
            Target::Model => What::Model,
            Target::Rules => What::Rules,
        }
    }
}

/// What started a reload.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Trigger {
    Watch,
    Signal,
    Admin,
}

impl std::fmt::Display for Trigger {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Trigger::Watch => "file change",
            Trigger::Signal => "SIGHUP",
            Trigger::Admin => "POST /reload",
        })
    }
}

/// How a reload of one target went.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Loaded, validated and now served.
    Ok,
    /// Refused; the old one keeps serving.
    Refused,
    /// Nothing to reload (no rules file configured).
    Skipped,
}

/// The outcome for one target, with what is served after it.
#[derive(Debug, Clone, Serialize)]
pub struct Outcome {
    pub result: Status,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
    /// The model served after the attempt (the new one, or the one kept).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub serving_model: Option<ModelInfo>,
    /// The rules served after the attempt (absent when there are none).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub serving_rules: Option<RulesInfo>,
}

/// The answer of one reload (also the JSON of `POST /reload`).
#[derive(Debug, Clone, Serialize)]
pub struct ReloadReport {
    pub trigger: Trigger,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model: Option<Outcome>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rules: Option<Outcome>,
}

impl ReloadReport {
    /// Everything asked for is now served: no refusal, and a reload asked of
    /// the rules alone had a rules file to load.
    pub fn succeeded(&self, what: What) -> bool {
        let refused = [&self.model, &self.rules].iter().any(|o| o.as_ref().is_some_and(|o| o.result == Status::Refused));
        let nothing = what == What::Rules && self.rules.as_ref().is_some_and(|o| o.result == Status::Skipped);
        !refused && !nothing
    }
}

/// Runs reloads, one at a time, for every trigger.
pub struct Reloader {
    settings: Arc<Settings>,
    model_path: PathBuf,
    rules_path: Option<PathBuf>,
    model: ModelHandle,
    rules: RulesHandle,
    model_reloader: Arc<dyn ModelReloader>,
    metrics: Arc<Metrics>,
    lock: tokio::sync::Mutex<()>,
}

impl Reloader {
    pub fn new(
        settings: Arc<Settings>,
        model: ModelHandle,
        rules: RulesHandle,
        model_reloader: Arc<dyn ModelReloader>,
        metrics: Arc<Metrics>,
    ) -> Reloader {
        let model_path = PathBuf::from(&settings.service.model);
        let rules_path = (!settings.rules.path.is_empty()).then(|| PathBuf::from(&settings.rules.path));
        Reloader { settings, model_path, rules_path, model, rules, model_reloader, metrics, lock: Default::default() }
    }

    /// The files a watcher should watch.
    pub fn files(&self) -> Vec<(Target, PathBuf)> {
        let mut v = vec![(Target::Model, self.model_path.clone())];
        if let Some(r) = &self.rules_path {
            v.push((Target::Rules, r.clone()));
        }
        v
    }

    /// Reload `what`; waits for a reload already running to finish first.
    pub async fn reload(&self, what: What, trigger: Trigger) -> ReloadReport {
        let _one_at_a_time = self.lock.lock().await;
        let model = if what.includes(Target::Model) { Some(self.reload_model(trigger).await) } else { None };
        let rules = if what.includes(Target::Rules) { Some(self.reload_rules(trigger).await) } else { None };
        ReloadReport { trigger, model, rules }
    }

    async fn reload_model(&self, trigger: Trigger) -> Outcome {
        let path = self.model_path.clone();
        match self.model_reloader.reload(path.clone()).await {
            Ok(info) => {
                self.metrics.reloaded(Target::Model.name(), true);
                self.metrics.model_classes.set(info.classes.len() as i64);
                tracing::info!(
                    "model reloaded ({trigger}) from {}: version {}, checksum {}",
                    path.display(),
                    info.model_version,
                    info.checksum
                );
                Outcome { result: Status::Ok, reason: None, serving_model: Some(info), serving_rules: None }
            }
            Err(e) => {
                self.metrics.reloaded(Target::Model.name(), false);
                let kept = self.model.current().info();
                tracing::warn!("model reload ({trigger}) refused, version {} keeps serving: {e}", kept.model_version);
                Outcome { result: Status::Refused, reason: Some(e.to_string()), serving_model: Some(kept), serving_rules: None }
            }
        }
    }

    async fn reload_rules(&self, trigger: Trigger) -> Outcome {
        let Some(path) = self.rules_path.clone() else {
            let reason = "rules.path is empty: there is no rules file to reload".to_string();
            return Outcome { result: Status::Skipped, reason: Some(reason), serving_model: None, serving_rules: None };
        };
        let settings = self.settings.clone();
        let loaded = tokio::task::spawn_blocking(move || RulesView::load(&settings, &path))
            .await
            .map_err(|e| ReloadError::Task(e.to_string()))
            .and_then(|r| r.map_err(ReloadError::from));
        match loaded {
            Ok(view) => {
                let info = view.info();
                self.metrics.rules_published(view.set.rules().iter().map(|r| r.id.as_str()));
                self.rules.publish(view);
                self.metrics.reloaded(Target::Rules.name(), true);
                tracing::info!(
                    "rules reloaded ({trigger}) from {}: {} rules, fingerprint {}",
                    info.source,
                    info.rules,
                    info.fingerprint
                );
                Outcome { result: Status::Ok, reason: None, serving_model: None, serving_rules: Some(info) }
            }
            Err(e) => {
                self.metrics.reloaded(Target::Rules.name(), false);
                let kept = self.rules.current().map(|r| r.info());
                let which = kept.as_ref().map_or("no rules".to_string(), |k| format!("rules {}", k.fingerprint));
                tracing::warn!("rules reload ({trigger}) refused, {which} keep serving: {e}");
                Outcome { result: Status::Refused, reason: Some(e.to_string()), serving_model: None, serving_rules: kept }
            }
        }
    }
}

/// The SIGHUP stream, installed when the service starts (so the signal no
/// longer ends the process).
pub type Hangup = tokio::signal::unix::Signal;

pub fn hangup_signal() -> std::io::Result<Hangup> {
    tokio::signal::unix::signal(tokio::signal::unix::SignalKind::hangup())
}

/// The coordinator: SIGHUP reloads both at once; watched changes are
/// debounced per target, then reloaded. Runs until `stop`.
pub async fn coordinate(
    reloader: Arc<Reloader>,
    mut hangup: Hangup,
    watched: Option<Arc<WatchFlags>>,
    debounce: Duration,
    stop: CancellationToken,
) {
    let mut debouncer = Debouncer::new(debounce);
    let flags = watched.unwrap_or_default();
    loop {
        let due = debouncer.next_due();
        tokio::select! {
            _ = stop.cancelled() => return,
            got = hangup.recv() => {
                if got.is_none() {
                    return;
                }
                tracing::info!("SIGHUP: reloading the model and the rules");
                reloader.reload(What::Both, Trigger::Signal).await;
            }
            _ = flags.wake.notified() => {
                let now = tokio::time::Instant::now().into_std();
                for t in Target::ALL {
                    if flags.take(t) {
                        debouncer.note(t, now);
                    }
                }
            }
            _ = tokio::time::sleep_until(due.map_or_else(tokio::time::Instant::now, tokio::time::Instant::from_std)), if due.is_some() => {
                for t in debouncer.take_due(tokio::time::Instant::now().into_std()) {
                    reloader.reload(t.into(), Trigger::Watch).await;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A stand-in for the online learner behind the model seam.
    struct Scripted {
        answer: Option<ModelInfo>,
        calls: std::sync::Mutex<Vec<PathBuf>>,
    }

    impl ModelReloader for Scripted {
        fn reload(&self, path: PathBuf) -> BoxFuture<'static, Result<ModelInfo, ReloadError>> {
            self.calls.lock().unwrap().push(path.clone());
            let answer = self.answer.clone().ok_or_else(|| ReloadError::Task(format!("{} refused by the stand-in", path.display())));
            async move { answer }.boxed()
        }
    }

    fn served_model() -> ModelHandle {
        use crate::features::Vocabulary;
        use crate::model::snapshot::SnapshotMeta;
        use crate::model::{Model, NbParams};
        let s = Settings::defaults();
        let voc = Vocabulary::new(s.model.vocabulary, 100, 0);
        let m = Model::new(NbParams::multinomial(1.0), s.analyzer, vec!["a".into(), "b".into()], voc).unwrap();
        let meta = SnapshotMeta::fresh(&m, Some("served-1".into()));
        ModelHandle::new(ModelView::new(m, meta, "c0ffee".into(), "served.svm".into()))
    }

    #[tokio::test]
    async fn the_model_step_goes_through_the_seam_and_a_refusal_keeps_the_served_model() {
        let mut settings = Settings::defaults();
        settings.service.model = "models/current.svm".into();
        let metrics = Arc::new(Metrics::new());
        let model = served_model();
        let refusing = Arc::new(Scripted { answer: None, calls: Default::default() });
        let r = Reloader::new(Arc::new(settings.clone()), model.clone(), RulesHandle::new(None), refusing.clone(), metrics.clone());
        let report = r.reload(What::Both, Trigger::Signal).await;
        assert_eq!(refusing.calls.lock().unwrap().as_slice(), [PathBuf::from("models/current.svm")]);
        let m = report.model.as_ref().unwrap();
        assert_eq!(m.result, Status::Refused);
        assert!(m.reason.as_deref().unwrap().contains("refused by the stand-in"));
        assert_eq!(m.serving_model.as_ref().unwrap().file_version, "served-1", "the served model is reported as kept");
        assert_eq!(report.rules.as_ref().unwrap().result, Status::Skipped, "no rules file");
        assert!(!report.succeeded(What::Both));
        assert_eq!(metrics.reloads.with_label_values(&["model", "refused"]).get(), 1);

        let mut info = model.current().info();
        info.model_version = "replayed-2".into();
        let accepting = Arc::new(Scripted { answer: Some(info), calls: Default::default() });
        let r = Reloader::new(Arc::new(settings), model.clone(), RulesHandle::new(None), accepting, metrics.clone());
        let report = r.reload(What::Model, Trigger::Admin).await;
        assert_eq!(report.model.unwrap().serving_model.unwrap().model_version, "replayed-2");
        assert!(report.rules.is_none());
        assert_eq!(metrics.reloads.with_label_values(&["model", "ok"]).get(), 1);
    }

    #[test]
    fn what_parses_the_query_and_covers_targets() {
        assert_eq!(What::parse(None), Ok(What::Both));
        assert_eq!(What::parse(Some("rules")), Ok(What::Rules));
        assert!(What::parse(Some("everything")).unwrap_err().contains("model, rules or both"));
        assert!(What::Both.includes(Target::Model) && What::Both.includes(Target::Rules));
        assert!(!What::Model.includes(Target::Rules));
    }

    fn outcome(result: Status) -> Outcome {
        Outcome { result, reason: None, serving_model: None, serving_rules: None }
    }

    #[test]
    fn a_report_succeeds_when_nothing_asked_for_was_refused() {
        let r = ReloadReport { trigger: Trigger::Admin, model: Some(outcome(Status::Ok)), rules: Some(outcome(Status::Skipped)) };
        assert!(r.succeeded(What::Both), "no rules file is not a failure of a reload of both");
        let r = ReloadReport { trigger: Trigger::Admin, model: None, rules: Some(outcome(Status::Skipped)) };
        assert!(!r.succeeded(What::Rules), "asked for the rules, and there are none");
        let r = ReloadReport { trigger: Trigger::Admin, model: Some(outcome(Status::Ok)), rules: Some(outcome(Status::Refused)) };
        assert!(!r.succeeded(What::Both));
        let json = serde_json::to_value(&r).unwrap();
        assert_eq!(json["rules"]["result"], "refused");
        assert_eq!(json["trigger"], "admin");
    }
}
