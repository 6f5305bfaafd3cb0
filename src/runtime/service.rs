//! `Service`: built from `Settings` (model and rules loaded and validated first), run until the input ends or the shutdown token fires; then drain, flush, commit and stop every task it started (the reload coordinator among them).

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use rdkafka::consumer::Consumer;
use rdkafka::producer::Producer;
use tokio::net::TcpListener;
use tokio_util::sync::CancellationToken;
use tokio_util::task::TaskTracker;

use crate::admin::{self, AdminState};
use crate::io::kafka::config::{admin_config, consumer_config, producer_config};
use crate::io::kafka::consumer::{commit_counted, watermarks, ConsumerOffsets, SourceConsumer, SourceContext};
use crate::io::kafka::producer::KafkaSink;
use crate::io::kafka::topics::{CreatePolicy, KnownTopics};
use crate::io::lines::{LineSink, LineSource};
use crate::io::sink::Sink;
use crate::metrics::Metrics;
use crate::runtime::ack::{AckShared, LatencyHook};
use crate::runtime::error::ServiceError;
use crate::io::kafka::label_log::KafkaLabelLog;
use crate::io::label_file::FileLabelLog;
use crate::io::message::Outgoing;
use crate::runtime::ack::AckTicket;
use crate::runtime::label_log::LabelLog;
use crate::runtime::learner::{self, LearnObserver, LearnerConfig, LearnerHandle, LearnerParts};
use crate::runtime::model_view::ModelHandle;
use crate::runtime::monitor::DriftMonitor;
use crate::runtime::resolver::Resolver;
use crate::runtime::startup;
use crate::runtime::pipeline::{retry_loop, Pipeline};
use crate::runtime::reload::{self, ModelReloader, PublishDirectly, Reloader, ThroughLearner};
use crate::runtime::router::Router;
use crate::runtime::rules_view::{RulesHandle, RulesView};
use crate::runtime::watermark::{NoOffsets, OffsetSink, Tracker};
use crate::settings::{Settings, SinkKind, SourceKind};

/// How often advanced watermarks are stored for the next automatic commit.
const OFFSET_STORE_INTERVAL: Duration = Duration::from_millis(20);

type RetryChannel = (
    tokio::sync::mpsc::UnboundedSender<crate::io::kafka::producer::Failed>,
    tokio::sync::mpsc::UnboundedReceiver<crate::io::kafka::producer::Failed>,
);

/// What `/readyz` reports: ready once the model is loaded and the group join completed.
#[derive(Debug, Default)]
pub struct Readiness {
    pub model_loaded: AtomicBool,
    pub joined: Arc<AtomicBool>,
    /// The source partitions owned now (`GET /assignment`).
    pub assignment: Arc<crate::runtime::assignment::Assignment>,
}

impl Readiness {
    pub fn ready(&self) -> bool {
        self.model_loaded.load(Ordering::SeqCst) && self.joined.load(Ordering::SeqCst)
    }
}

/// How a run ended.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RunReport {
    pub records_in: u64,
    /// False if the drain limit passed with records still in flight (they are read again next time).
    pub drained: bool,
}

/// The streaming service.
pub struct Service {
    settings: Settings,
    metrics: Arc<Metrics>,
    model: ModelHandle,
    rules: RulesHandle,
    model_reloader: Option<Arc<dyn ModelReloader>>,
    router: Arc<Router>,
    readiness: Arc<Readiness>,
    latency_hook: Option<LatencyHook>,
    drift: Arc<DriftMonitor>,
    /// A label log given by the embedding program (the demo), used instead of the settings' one.
    label_log: std::sync::Mutex<Option<Box<dyn LabelLog>>>,
    observer: Option<Arc<dyn LearnObserver>>,
    /// The running learner, for reloads and snapshots on request.
    learner: Arc<std::sync::OnceLock<Arc<LearnerHandle>>>,
    /// A line source and a sink given by the embedding program (the demo), used
    /// instead of stdin/file and stdout/file.
    source_override: std::sync::Mutex<Option<LineSource>>,
    sink_override: std::sync::Mutex<Option<Sink>>,
    /// The admin endpoint's address once bound.
    admin_addr: Arc<std::sync::OnceLock<std::net::SocketAddr>>,
}

impl Service {
    /// Load the model named by `service.model` and the rules named by
    /// `rules.path` (if any), and build the router; nothing is connected yet.
    pub fn new(settings: Settings) -> Result<Service, ServiceError> {
        if settings.service.model.is_empty() {
            return Err(ServiceError::NoModel);
        }
        let metrics = Arc::new(Metrics::new());
        let view = startup::initial_view(&settings, &metrics).map_err(ServiceError::Model)?;
        let router = Router::new(&settings).map_err(|e| ServiceError::Analyzer(e.to_string()))?;
        let rules = match settings.rules.path.as_str() {
            "" => None,
            path => Some(RulesView::load(&settings, Path::new(path)).map_err(ServiceError::Rules)?),
        };
        metrics.rules_published(rules.iter().flat_map(|r| r.set.rules().iter().map(|x| x.id.as_str())));
        metrics.model_classes.set(view.classes.len() as i64);
        metrics.model_labels_applied.set(view.applied as i64);
        metrics.in_flight_limit.set(settings.delivery.max_in_flight_per_partition as i64);
        for r in crate::io::headers::REASONS.iter().chain(crate::learn::event::REASONS) {
            metrics.dead_lettered.with_label_values(&[r]);
        }
        if settings.learning.enabled {
            for r in crate::learn::event::REASONS {
                metrics.labels_rejected.with_label_values(&[r]);
            }
        }
        let readiness = Arc::new(Readiness::default());
        readiness.model_loaded.store(true, Ordering::SeqCst);
        let model = ModelHandle::new(view);
        let drift = Arc::new(DriftMonitor::new(&settings.drift, &settings.status_page, metrics.clone(), model.clone()));
        Ok(Service {
            settings,
            metrics,
            model,
            drift,
            rules: RulesHandle::new(rules),
            model_reloader: None,
            router: Arc::new(router),
            readiness,
            latency_hook: None,
            label_log: std::sync::Mutex::new(None),
            observer: None,
            learner: Arc::new(std::sync::OnceLock::new()),
            source_override: std::sync::Mutex::new(None),
            sink_override: std::sync::Mutex::new(None),
            admin_addr: Arc::new(std::sync::OnceLock::new()),
        })
    }

    /// Read records from `source` instead of stdin or the settings' file.
    pub fn set_line_source(&mut self, source: LineSource) {
        *self.source_override.lock().expect("source slot") = Some(source);
    }

    /// Write outputs to `sink` instead of the settings' sink.
    pub fn set_sink(&mut self, sink: Sink) {
        *self.sink_override.lock().expect("sink slot") = Some(sink);
    }

    /// Where the admin endpoint listens, once `run` has bound it.
    pub fn admin_addr(&self) -> Arc<std::sync::OnceLock<std::net::SocketAddr>> {
        self.admin_addr.clone()
    }

    /// Learn from this label log instead of the one the settings name.
    pub fn set_label_log(&mut self, log: Box<dyn LabelLog>) {
        *self.label_log.lock().expect("label log slot") = Some(log);
    }

    /// Tell `observer` what the learner does.
    pub fn set_learn_observer(&mut self, observer: Arc<dyn LearnObserver>) {
        self.observer = Some(observer);
    }

    /// The learner once `run` started it (learning on): reloads and snapshots go through it.
    pub fn learner(&self) -> Arc<std::sync::OnceLock<Arc<LearnerHandle>>> {
        self.learner.clone()
    }

    pub fn metrics(&self) -> Arc<Metrics> {
        self.metrics.clone()
    }

    /// The seam where a reloader or learner publishes new model views.
    pub fn model(&self) -> ModelHandle {
        self.model.clone()
    }

    /// Drift and health monitoring (docs/drift.md). The learner reports here through its
    /// `LearnObserver` interface (each label compared with the decision made before it was
    /// learned, snapshots, reloads); other callers use `observe_feedback` and the like directly.
    pub fn drift(&self) -> Arc<DriftMonitor> {
        self.drift.clone()
    }

    /// The seam where a reload publishes new rules.
    pub fn rules(&self) -> RulesHandle {
        self.rules.clone()
    }

    /// Replace how model reloads load and publish a file (the online learner
    /// installs itself here). Without one, a reload publishes the file as is.
    pub fn set_model_reloader(&mut self, r: Arc<dyn ModelReloader>) {
        self.model_reloader = Some(r);
    }

    pub fn readiness(&self) -> Arc<Readiness> {
        self.readiness.clone()
    }

    /// Observe every end-to-end latency (seconds) as it is measured.
    pub fn set_latency_hook(&mut self, hook: LatencyHook) {
        self.latency_hook = Some(hook);
    }

    /// Run until the input ends (stdin, files) or `shutdown` is cancelled.
    pub async fn run(self, shutdown: CancellationToken) -> Result<RunReport, ServiceError> {
        let tasks = TaskTracker::new();
        let stop_aux = CancellationToken::new();
        let result = self.run_inner(&tasks, &stop_aux, shutdown).await;
        stop_aux.cancel();
        tasks.close();
        tasks.wait().await;
        result
    }

    async fn run_inner(
        &self,
        tasks: &TaskTracker,
        stop_aux: &CancellationToken,
        shutdown: CancellationToken,
    ) -> Result<RunReport, ServiceError> {
        let s = &self.settings;
        let reloader = self.start_reload(tasks, stop_aux)?;
        if s.admin.enabled {
            let listener = TcpListener::bind(&s.admin.bind)
                .await
                .map_err(|e| ServiceError::AdminBind { addr: s.admin.bind.clone(), source: e })?;
            if let Ok(a) = listener.local_addr() {
                let _ = self.admin_addr.set(a);
            }
            let addr = listener.local_addr().map(|a| a.to_string()).unwrap_or_default();
            tracing::info!("admin endpoint on http://{addr}");
            let state = AdminState {
                metrics: self.metrics.clone(),
                model: self.model.clone(),
                rules: self.rules.clone(),
                reloader: Some(reloader),
                router: self.router.clone(),
                readiness: self.readiness.clone(),
                token: (!s.admin.token.is_empty()).then(|| s.admin.token.clone()),
                drift: Some(self.drift.clone()),
                status_page: s.status_page.enabled,
            };
            tasks.spawn(admin::serve(listener, state, stop_aux.clone()));
        }

        // The status page's history: one sample per interval, whatever the record rate.
        let (drift, stop, every) =
            (self.drift.clone(), stop_aux.clone(), Duration::from_millis(s.status_page.sample_interval_ms));
        tasks.spawn(async move {
            let mut tick = tokio::time::interval(every);
            loop {
                tokio::select! {
                    _ = stop.cancelled() => return,
                    _ = tick.tick() => drift.sample(),
                }
            }
        });

        let (sink, retry) = self.build_sink().await?;
        let sink = Arc::new(sink);
        let retry = retry.map(|(tx, rx)| {
            tasks.spawn(retry_loop(
                sink.clone(),
                rx,
                tx.clone(),
                s.dead_letter.topic.clone(),
                self.metrics.clone(),
                stop_aux.clone(),
            ));
            tx
        });
        let shared = Arc::new(AckShared { metrics: self.metrics.clone(), latency_hook: self.latency_hook.clone() });
        let drain_limit = Duration::from_millis(s.service.drain_timeout_ms);
        let learner = if s.learning.enabled {
            let l = self.start_learner(tasks, &sink, &shared, retry.clone()).await?;
            Some(StopOnDrop(l))
        } else {
            None
        };
        let learner = learner.as_ref().map(|l| &l.0);
        let resolver = Resolver::from_settings(s, self.metrics.clone()).map(Arc::new);
        let make_pipeline = |tracker: Arc<Tracker>| Pipeline {
            router: self.router.clone(),
            model: self.model.clone(),
            rules: self.rules.clone(),
            sink: sink.clone(),
            tracker,
            shared: shared.clone(),
            limit: s.delivery.max_in_flight_per_partition,
            retry: retry.clone(),
            drift: Some(self.drift.clone()),
            resolver: resolver.clone(),
        };

        match s.source.kind {
            SourceKind::Kafka => {
                let offsets = Arc::new(ConsumerOffsets::default());
                let tracker = Arc::new(Tracker::new(offsets.clone() as Arc<dyn OffsetSink>));
                let ctx = SourceContext {
                    tracker: tracker.clone(),
                    metrics: self.metrics.clone(),
                    revoke_drain: Duration::from_millis(s.delivery.revoke_drain_ms),
                    joined: self.readiness.joined.clone(),
                    assignment: self.readiness.assignment.clone(),
                };
                let consumer: SourceConsumer = consumer_config(s)
                    .create_with_context(ctx)
                    .map_err(|e| ServiceError::Kafka { what: "consumer".into(), source: e })?;
                let consumer = Arc::new(consumer);
                offsets.attach(&consumer);
                let mut topics: Vec<&str> = s.source.topics.iter().map(String::as_str).collect();
                if let Some(r) = &resolver {
                    topics.push(&r.raw_topic);
                }
                consumer
                    .subscribe(&topics)
                    .map_err(|e| ServiceError::Kafka { what: format!("subscribe to {topics:?}"), source: e })?;
                // Watermarks reach the consumer's offset store on a short interval, not per ack.
                let (t2, stop) = (tracker.clone(), stop_aux.clone());
                tasks.spawn(async move {
                    let mut tick = tokio::time::interval(OFFSET_STORE_INTERVAL);
                    loop {
                        tokio::select! {
                            _ = stop.cancelled() => return,
                            _ = tick.tick() => t2.store_advanced(),
                        }
                    }
                });
                let pipeline = make_pipeline(tracker.clone());
                let looped = pipeline.run_kafka(&consumer, &shutdown).await;
                let drained = self.finish(&pipeline, &sink, drain_limit, learner).await;
                tracker.store_advanced();
                let tpl = watermarks(&tracker);
                if tpl.count() > 0 {
                    commit_counted(consumer.as_ref(), &tpl, &self.metrics);
                }
                // Leave the group now so the partitions move at once; the revoke callback
                // finds nothing in flight and commits the same watermarks.
                let c = consumer.clone();
                drop(consumer);
                let _ = tokio::task::spawn_blocking(move || {
                    c.unsubscribe();
                    drop(c);
                })
                .await;
                looped?;
                Ok(RunReport { records_in: self.metrics.records_in.get(), drained })
            }
            SourceKind::Stdin | SourceKind::File => {
                self.readiness.joined.store(true, Ordering::SeqCst);
                let given = self.source_override.lock().expect("source slot").take();
                let mut src = if let Some(g) = given {
                    g
                } else if s.source.kind == SourceKind::Stdin {
                    LineSource::stdin()
                } else {
                    LineSource::file(s.source.path.as_ref())
                        .await
                        .map_err(|e| ServiceError::Io { what: format!("cannot open {}", s.source.path), source: e })?
                };
                let tracker = Arc::new(Tracker::new(Arc::new(NoOffsets)));
                let pipeline = make_pipeline(tracker);
                let looped = pipeline.run_lines(&mut src, &shutdown).await;
                let drained = self.finish(&pipeline, &sink, drain_limit, learner).await;
                looped?;
                Ok(RunReport { records_in: self.metrics.records_in.get(), drained })
            }
        }
    }

    /// The reloader shared by every trigger, and its coordinator task (SIGHUP,
    /// and the file watcher when `reload.watch` is on).
    fn start_reload(&self, tasks: &TaskTracker, stop: &CancellationToken) -> Result<Arc<Reloader>, ServiceError> {
        let s = &self.settings;
        // Model reloads go through the learner when it runs (it replays the
        // label log from the file's offsets before publishing), else straight in.
        let model_reloader = self.model_reloader.clone().unwrap_or_else(|| -> Arc<dyn ModelReloader> {
            if s.learning.enabled {
                Arc::new(ThroughLearner { learner: self.learner.clone(), model: self.model.clone() })
            } else {
                Arc::new(PublishDirectly { model: self.model.clone(), analyzer: s.analyzer.clone() })
            }
        });
        let reloader = Arc::new(Reloader::new(
            Arc::new(s.clone()),
            self.model.clone(),
            self.rules.clone(),
            model_reloader,
            self.metrics.clone(),
        ));
        let hangup = reload::hangup_signal().map_err(ServiceError::Hangup)?;
        let watch = if s.reload.watch {
            let files = reloader.files();
            let files: Vec<_> = files.iter().map(|(t, p)| (*t, p.as_path())).collect();
            Some(crate::runtime::watch::watch(&files)?)
        } else {
            None
        };
        let (r, stop) = (reloader.clone(), stop.clone());
        let debounce = Duration::from_millis(s.reload.debounce_ms);
        tasks.spawn(async move {
            let flags = watch.as_ref().map(|w| w.flags.clone());
            reload::coordinate(r, hangup, flags, debounce, stop).await;
            drop(watch);
        });
        Ok(reloader)
    }

    /// Drain in-flight records within the limit, stop the learner (it writes a
    /// last snapshot and its last dead letters), then flush the sink.
    async fn finish(&self, pipeline: &Pipeline, sink: &Sink, limit: Duration, learner: Option<&Arc<LearnerHandle>>) -> bool {
        let started = std::time::Instant::now();
        let drained = pipeline.drain(limit).await;
        if let Some(l) = learner {
            let l = l.clone();
            let _ = tokio::task::spawn_blocking(move || l.stop()).await;
        }
        if !drained {
            self.metrics.drain_timeouts.inc();
            tracing::warn!(
                "drain limit {limit:?} passed with {} records in flight; they are not committed and will be read again",
                pipeline.tracker.in_flight()
            );
        }
        let left = limit.saturating_sub(started.elapsed()).max(Duration::from_millis(100));
        sink.flush(left).await;
        drained
    }

    /// Start the learner on the label log (given, a followed file, or the
    /// learned-label topic) and wait, within the catch-up limit, until it has
    /// read the log to its end, so the first records are scored with every
    /// label already in the log.
    async fn start_learner(
        &self,
        tasks: &TaskTracker,
        sink: &Arc<Sink>,
        shared: &Arc<AckShared>,
        retry: Option<tokio::sync::mpsc::UnboundedSender<crate::io::kafka::producer::Failed>>,
    ) -> Result<Arc<LearnerHandle>, ServiceError> {
        let s = &self.settings;
        let given = self.label_log.lock().expect("label log slot").take();
        let log: Box<dyn LabelLog> = match given {
            Some(l) => l,
            None if s.source.kind == SourceKind::Kafka => {
                let s2 = s.clone();
                let made = tokio::task::spawn_blocking(move || KafkaLabelLog::new(&s2))
                    .await
                    .map_err(|e| ServiceError::Learner(e.to_string()))?;
                Box::new(made.map_err(|e| match e {
                    crate::runtime::label_log::LabelLogError::MissingTopic(t) => {
                        ServiceError::MissingTopic { topic: t, role: "learned-label topic" }
                    }
                    other => ServiceError::Learner(other.to_string()),
                })?)
            }
            None if !s.learning.label_path.is_empty() => Box::new(FileLabelLog::new(Path::new(&s.learning.label_path))),
            None => {
                return Err(ServiceError::Learner(
                    "learning.enabled is on but there is no label log: set learning.label_path (stdin/file sources)".into(),
                ))
            }
        };
        let (dead_tx, dead_rx) = tokio::sync::mpsc::unbounded_channel();
        tasks.spawn(forward_dead_letters(sink.clone(), dead_rx, shared.clone(), retry));
        let parts = LearnerParts {
            start: self.model.current(),
            log,
            models: self.model.clone(),
            metrics: self.metrics.clone(),
            // The drift monitor takes each label's test-then-train comparison (docs/drift.md).
            observer: Some(match &self.observer {
                Some(o) => Arc::new(crate::runtime::monitor::BothObservers(self.drift.clone(), o.clone())) as Arc<dyn LearnObserver>,
                None => self.drift.clone() as Arc<dyn LearnObserver>,
            }),
            dead_letters: Some(dead_tx),
        };
        let handle = Arc::new(
            learner::start(parts, LearnerConfig::from_settings(s)).map_err(|e| ServiceError::Learner(e.to_string()))?,
        );
        let _ = self.learner.set(handle.clone());
        let limit = Duration::from_millis(s.learning.catch_up_timeout_ms);
        if !handle.wait_caught_up(limit).await {
            tracing::warn!("the label log was not read to its end within {limit:?}; scoring starts meanwhile");
        }
        Ok(handle)
    }

    async fn build_sink(&self) -> Result<(Sink, Option<RetryChannel>), ServiceError> {
        let s = &self.settings;
        let flush_each = s.source.kind == SourceKind::Kafka;
        if let Some(given) = self.sink_override.lock().expect("sink slot").take() {
            return Ok((given, None));
        }
        match s.sink.kind {
            SinkKind::Stdout => Ok((Sink::Lines(LineSink::stdout(flush_each)), None)),
            SinkKind::File => {
                let l = LineSink::file(s.sink.path.as_ref(), flush_each)
                    .map_err(|e| ServiceError::Io { what: format!("cannot open {}", s.sink.path), source: e })?;
                Ok((Sink::Lines(l), None))
            }
            SinkKind::Kafka => {
                let (kafka, rx) = KafkaSink::new(&producer_config(s))
                    .map_err(|e| ServiceError::Kafka { what: "producer".into(), source: e })?;
                let admin = if s.routing.create_missing_topics {
                    Some(
                        admin_config(s)
                            .create()
                            .map_err(|e| ServiceError::Kafka { what: "admin client".into(), source: e })?,
                    )
                } else {
                    None
                };
                let topics = Arc::new(KnownTopics::new(
                    kafka.producer().clone(),
                    admin,
                    CreatePolicy {
                        enabled: s.routing.create_missing_topics,
                        partitions: s.routing.create_partitions,
                        replication: s.routing.create_replication_factor,
                    },
                    Duration::from_millis(s.routing.metadata_refresh_ms),
                ));
                let tx = kafka.producer().context().retry.clone();
                let sink = Sink::Kafka { sink: kafka, topics: topics.clone() };
                for (topic, role) in
                    [(&s.routing.review_topic, "review topic"), (&s.dead_letter.topic, "dead-letter topic")]
                {
                    if !topics.exists(topic).await {
                        return Err(ServiceError::MissingTopic { topic: topic.clone(), role });
                    }
                }
                Ok((sink, Some((tx, rx))))
            }
        }
    }
}

/// Stops the learner when the run ends on any path (errors included), so its
/// thread and the dead-letter forwarder it feeds always finish.
struct StopOnDrop(Arc<LearnerHandle>);

impl Drop for StopOnDrop {
    fn drop(&mut self) {
        self.0.stop();
    }
}

/// Refused label events from the learner, sent to the dead-letter destination
/// like any output (counted on acknowledgement, retried on failure). Ends when
/// the learner drops its sender.
async fn forward_dead_letters(
    sink: Arc<Sink>,
    mut rx: tokio::sync::mpsc::UnboundedReceiver<Outgoing>,
    shared: Arc<AckShared>,
    retry: Option<tokio::sync::mpsc::UnboundedSender<crate::io::kafka::producer::Failed>>,
) {
    let side = Tracker::new(Arc::new(NoOffsets));
    let track = side.get("label-dead-letters", 0);
    let mut n = 0i64;
    while let Some(out) = rx.recv().await {
        let ticket = AckTicket::begin(track.clone(), n, None, out.kind.clone(), shared.clone());
        n += 1;
        match sink.send(out, ticket).await {
            Ok(()) => {}
            Err(crate::io::sink::SendError::Kafka(f)) => {
                if let Some(tx) = &retry {
                    let _ = tx.send(f);
                }
            }
            Err(crate::io::sink::SendError::Io(e)) => tracing::error!("cannot write a label dead letter: {e}"),
        }
    }
}
