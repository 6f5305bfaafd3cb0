//! `Service`: built from `Settings` (model and rules loaded and validated first), run until the input ends or the shutdown token fires; then drain, flush, commit and stop every task it started (the reload coordinator among them).

use std::path::PathBuf;
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
use crate::runtime::model_view::{ModelHandle, ModelView};
use crate::runtime::pipeline::{retry_loop, Pipeline};
use crate::runtime::reload::{self, ModelReloader, PublishDirectly, Reloader};
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
}

impl Service {
    /// Load the model named by `service.model` and the rules named by
    /// `rules.path` (if any), and build the router; nothing is connected yet.
    pub fn new(settings: Settings) -> Result<Service, ServiceError> {
        if settings.service.model.is_empty() {
            return Err(ServiceError::NoModel);
        }
        let view = ModelView::load(&PathBuf::from(&settings.service.model), &settings.analyzer)
            .map_err(ServiceError::Model)?;
        let router = Router::new(&settings).map_err(|e| ServiceError::Analyzer(e.to_string()))?;
        let rules = match settings.rules.path.as_str() {
            "" => None,
            path => Some(RulesView::load(&settings, &PathBuf::from(path)).map_err(ServiceError::Rules)?),
        };
        let metrics = Arc::new(Metrics::new());
        metrics.rules_published(rules.iter().flat_map(|r| r.set.rules().iter().map(|x| x.id.as_str())));
        metrics.model_classes.set(view.classes.len() as i64);
        metrics.in_flight_limit.set(settings.delivery.max_in_flight_per_partition as i64);
        for r in crate::io::headers::REASONS {
            metrics.dead_lettered.with_label_values(&[r]);
        }
        let readiness = Arc::new(Readiness::default());
        readiness.model_loaded.store(true, Ordering::SeqCst);
        Ok(Service {
            settings,
            metrics,
            model: ModelHandle::new(view),
            rules: RulesHandle::new(rules),
            model_reloader: None,
            router: Arc::new(router),
            readiness,
            latency_hook: None,
        })
    }

    pub fn metrics(&self) -> Arc<Metrics> {
        self.metrics.clone()
    }

    /// The seam where a reloader or learner publishes new model views.
    pub fn model(&self) -> ModelHandle {
        self.model.clone()
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
            };
            tasks.spawn(admin::serve(listener, state, stop_aux.clone()));
        }

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
        let make_pipeline = |tracker: Arc<Tracker>| Pipeline {
            router: self.router.clone(),
            model: self.model.clone(),
            rules: self.rules.clone(),
            sink: sink.clone(),
            tracker,
            shared: shared.clone(),
            limit: s.delivery.max_in_flight_per_partition,
            retry: retry.clone(),
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
                };
                let consumer: SourceConsumer = consumer_config(s)
                    .create_with_context(ctx)
                    .map_err(|e| ServiceError::Kafka { what: "consumer".into(), source: e })?;
                let consumer = Arc::new(consumer);
                offsets.attach(&consumer);
                let topics: Vec<&str> = s.source.topics.iter().map(String::as_str).collect();
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
                let drained = self.finish(&pipeline, &sink, drain_limit).await;
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
                let mut src = if s.source.kind == SourceKind::Stdin {
                    LineSource::stdin()
                } else {
                    LineSource::file(s.source.path.as_ref())
                        .await
                        .map_err(|e| ServiceError::Io { what: format!("cannot open {}", s.source.path), source: e })?
                };
                let tracker = Arc::new(Tracker::new(Arc::new(NoOffsets)));
                let pipeline = make_pipeline(tracker);
                let looped = pipeline.run_lines(&mut src, &shutdown).await;
                let drained = self.finish(&pipeline, &sink, drain_limit).await;
                looped?;
                Ok(RunReport { records_in: self.metrics.records_in.get(), drained })
            }
        }
    }

    /// The reloader shared by every trigger, and its coordinator task (SIGHUP,
    /// and the file watcher when `reload.watch` is on).
    fn start_reload(&self, tasks: &TaskTracker, stop: &CancellationToken) -> Result<Arc<Reloader>, ServiceError> {
        let s = &self.settings;
        let model_reloader = self.model_reloader.clone().unwrap_or_else(|| {
            Arc::new(PublishDirectly { model: self.model.clone(), analyzer: s.analyzer.clone() })
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

    /// Drain in-flight records within the limit, then flush the sink.
    async fn finish(&self, pipeline: &Pipeline, sink: &Sink, limit: Duration) -> bool {
        let started = std::time::Instant::now();
        let drained = pipeline.drain(limit).await;
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

    async fn build_sink(&self) -> Result<(Sink, Option<RetryChannel>), ServiceError> {
        let s = &self.settings;
        let flush_each = s.source.kind == SourceKind::Kafka;
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
