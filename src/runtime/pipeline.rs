//! The record loop: read from the source, wait for room in the partition (backpressure), route against one model view and one rules set, hand to the sink; plus the retry loop for failed deliveries and the drain at the end.

use std::sync::Arc;
use std::time::{Duration, Instant};

use rdkafka::message::{Headers, Message};
use tokio::sync::mpsc;
use tokio_util::sync::CancellationToken;

use crate::io::headers::REASON_UNKNOWN_DESTINATION;
use crate::io::kafka::consumer::SourceConsumer;
use crate::io::kafka::producer::{is_unknown_topic, reroute_unknown, Failed};
use crate::io::lines::LineSource;
use crate::io::message::{Inbound, OutKind, Outgoing};
use crate::io::sink::{SendError, Sink};
use crate::metrics::Metrics;
use crate::runtime::ack::{AckShared, AckTicket};
use crate::runtime::error::ServiceError;
use crate::runtime::model_view::ModelHandle;
use crate::runtime::monitor::{DecisionObserver, DriftMonitor};
use crate::runtime::resolver::Resolver;
use crate::runtime::router::{RouteScratch, Router};
use crate::runtime::rules_view::RulesHandle;
use crate::runtime::watermark::{PartitionTrack, Tracker};

/// Wait between sends of a failed delivery.
const RETRY_BACKOFF: Duration = Duration::from_millis(200);

/// Everything the record loop needs.
pub struct Pipeline {
    pub router: Arc<Router>,
    pub model: ModelHandle,
    pub rules: RulesHandle,
    pub sink: Arc<Sink>,
    pub tracker: Arc<Tracker>,
    pub shared: Arc<AckShared>,
    /// delivery.max_in_flight_per_partition
    pub limit: usize,
    /// Where immediate send failures go (the Kafka sink's retry channel).
    pub retry: Option<mpsc::UnboundedSender<Failed>>,
    /// Drift bookkeeping; the record loop owns an observer made from it (none when `drift.enabled` is off).
    pub drift: Option<Arc<DriftMonitor>>,
    /// Remembers scored records and resolves id-only labels (learning with a raw label topic).
    pub resolver: Option<Arc<Resolver>>,
}

impl Pipeline {
    pub fn metrics(&self) -> &Metrics {
        &self.shared.metrics
    }

    /// Wait until the partition has room for one more record; false if shutdown came first.
    async fn room(&self, track: &PartitionTrack, shutdown: &CancellationToken) -> bool {
        if track.in_flight() < self.limit {
            return true;
        }
        loop {
            let notified = self.tracker.room().notified();
            tokio::pin!(notified);
            notified.as_mut().enable();
            self.tracker.room().announce_waiting();
            if track.in_flight() < self.limit {
                return true;
            }
            tokio::select! {
                _ = shutdown.cancelled() => return false,
                _ = &mut notified => {}
                _ = tokio::time::sleep(Duration::from_millis(100)) => {}
            }
        }
    }

    /// Route one record and hand its output to the sink.
    async fn process(
        &self,
        track: &Arc<PartitionTrack>,
        rec: &Inbound<'_>,
        scratch: &mut RouteScratch,
        observer: &mut Option<DecisionObserver>,
    ) -> Result<(), ServiceError> {
        let m = self.metrics();
        m.records_in.inc();
        let started = Instant::now();
        // One model view and one rules set per record, each read once.
        let view = self.model.current();
        let rules = self.rules.current();
        let (out, decision) = self.router.route(&view, rules.as_deref().map(|r| &r.set), rec, scratch);
        m.scoring_latency.observe(started.elapsed().as_secs_f64());
        if let Some(d) = &decision {
            m.count_decided_by(&d.decided_by);
        }
        if let (Some(o), Some(d)) = (observer.as_mut(), &decision) {
            o.observe(&view, d, scratch, started);
        }
        drop((view, rules));
        if let (Some(r), Some(d)) = (&self.resolver, &decision) {
            if let (Some(id), Some(class)) = (&d.id, crate::runtime::router::class_label(&out.kind)) {
                r.remember(id, scratch.terms(), class.clone(), rec.partition);
            }
        }
        self.emit(track, rec, out).await
    }

    /// Resolve one id-only label from the raw label topic into its output.
    async fn process_label(&self, track: &Arc<PartitionTrack>, rec: &Inbound<'_>, resolver: &Resolver) -> Result<(), ServiceError> {
        let view = self.model.current();
        let out = resolver.resolve(rec, &view);
        drop(view);
        self.emit(track, rec, out).await
    }

    /// Hand one output to the sink, tracked until it is acknowledged.
    async fn emit(&self, track: &Arc<PartitionTrack>, rec: &Inbound<'_>, mut out: Outgoing) -> Result<(), ServiceError> {
        if !matches!(out.kind, OutKind::DeadLetter { .. }) && !self.sink.destination_exists(&out.topic).await {
            let detail = format!("topic {} does not exist", out.topic);
            out = self.router.dead_letter(rec, REASON_UNKNOWN_DESTINATION, Some(detail));
        }
        let ticket =
            AckTicket::begin(track.clone(), rec.offset, rec.timestamp_ms, out.kind.clone(), self.shared.clone());
        match self.sink.send(out, ticket).await {
            Ok(()) => Ok(()),
            Err(SendError::Kafka(f)) => {
                tracing::warn!("producer refused a message for {}: {}; sending it again", f.out.topic, f.error);
                if let Some(tx) = &self.retry {
                    let _ = tx.send(f);
                }
                Ok(())
            }
            Err(SendError::Io(e)) => Err(ServiceError::Io { what: "cannot write output".into(), source: e }),
        }
    }

    fn observer(&self) -> Option<DecisionObserver> {
        self.drift.as_ref().and_then(|d| d.observer())
    }

    /// The last records' drift counters go out when the loop ends.
    fn publish_drift(&self, observer: &mut Option<DecisionObserver>) {
        if let Some(o) = observer {
            o.publish(&self.model.current(), Instant::now());
        }
    }

    /// Consume until shutdown.
    pub async fn run_kafka(&self, consumer: &SourceConsumer, shutdown: &CancellationToken) -> Result<(), ServiceError> {
        let mut scratch = RouteScratch::default();
        let mut observer = self.observer();
        // Partition handles by partition number, re-fetched after a revoke closes them.
        let mut cache: Vec<Option<Arc<PartitionTrack>>> = Vec::new();
        loop {
            let msg = tokio::select! {
                biased;
                _ = shutdown.cancelled() => break,
                m = consumer.recv() => m,
            };
            let msg = match msg {
                Ok(m) => m,
                Err(e) => {
                    self.metrics().consumer_errors.inc();
                    tracing::warn!("consumer: {e} (the client reconnects by itself)");
                    continue;
                }
            };
            let track = self.cached_track(&mut cache, msg.topic(), msg.partition());
            if !self.room(&track, shutdown).await {
                break;
            }
            let headers = msg
                .headers()
                .map(|hs| hs.iter().map(|h| (h.key, h.value.unwrap_or_default())).collect())
                .unwrap_or_default();
            let rec = Inbound {
                topic: msg.topic(),
                partition: msg.partition(),
                offset: msg.offset(),
                key: msg.key(),
                payload: msg.payload(),
                headers,
                timestamp_ms: msg.timestamp().to_millis(),
            };
            match &self.resolver {
                Some(r) if r.raw_topic == rec.topic => self.process_label(&track, &rec, r).await?,
                _ => self.process(&track, &rec, &mut scratch, &mut observer).await?,
            }
        }
        self.publish_drift(&mut observer);
        Ok(())
    }

    fn cached_track(&self, cache: &mut Vec<Option<Arc<PartitionTrack>>>, topic: &str, partition: i32) -> Arc<PartitionTrack> {
        let i = partition.max(0) as usize;
        if let Some(Some(t)) = cache.get(i) {
            if t.topic == topic && !t.is_closed() {
                return t.clone();
            }
        }
        let t = self.tracker.get(topic, partition);
        if cache.len() <= i {
            cache.resize(i + 1, None);
        }
        cache[i] = Some(t.clone());
        t
    }

    /// Read lines until the end of input or shutdown. Offsets are 0-based line indexes;
    /// empty lines are not records.
    pub async fn run_lines(&self, src: &mut LineSource, shutdown: &CancellationToken) -> Result<(), ServiceError> {
        let name = src.name.clone();
        let track = self.tracker.get(&name, 0);
        let mut scratch = RouteScratch::default();
        let mut observer = self.observer();
        let mut buf = Vec::new();
        let mut offset = -1i64;
        loop {
            let more = tokio::select! {
                biased;
                _ = shutdown.cancelled() => break,
                r = src.next_line(&mut buf) => r.map_err(|e| ServiceError::Io { what: format!("cannot read {name}"), source: e })?,
            };
            if !more {
                break;
            }
            offset += 1;
            if buf.is_empty() {
                continue;
            }
            if !self.room(&track, shutdown).await {
                break;
            }
            let rec = Inbound {
                topic: &name,
                partition: 0,
                offset,
                key: None,
                payload: Some(&buf),
                headers: Vec::new(),
                timestamp_ms: Some(crate::runtime::now_ms()),
            };
            self.process(&track, &rec, &mut scratch, &mut observer).await?;
        }
        self.publish_drift(&mut observer);
        Ok(())
    }

    /// Wait until nothing is in flight or `limit` passes; true if drained.
    pub async fn drain(&self, limit: Duration) -> bool {
        let deadline = Instant::now() + limit;
        loop {
            let notified = self.tracker.room().notified();
            tokio::pin!(notified);
            notified.as_mut().enable();
            self.tracker.room().announce_waiting();
            if self.tracker.in_flight() == 0 {
                return true;
            }
            let now = Instant::now();
            if now >= deadline {
                return false;
            }
            tokio::select! {
                _ = &mut notified => {}
                _ = tokio::time::sleep((deadline - now).min(Duration::from_millis(50))) => {}
            }
        }
    }
}

/// Send failed deliveries again until they are acknowledged: to dead letters when the
/// destination topic is gone, else to the same topic after a pause. Runs until `stop`.
pub async fn retry_loop(
    sink: Arc<Sink>,
    mut rx: mpsc::UnboundedReceiver<Failed>,
    tx: mpsc::UnboundedSender<Failed>,
    dead_topic: String,
    metrics: Arc<Metrics>,
    stop: CancellationToken,
) {
    loop {
        let f = tokio::select! {
            _ = stop.cancelled() => return,
            f = rx.recv() => match f { Some(f) => f, None => return },
        };
        metrics.output_retries.inc();
        let f = if is_unknown_topic(&f.error) && !matches!(f.out.kind, OutKind::DeadLetter { .. }) {
            tracing::warn!("destination {} does not exist (any more): dead-lettering", f.out.topic);
            if let Sink::Kafka { topics, .. } = &*sink {
                topics.forget(&f.out.topic);
            }
            reroute_unknown(f, &dead_topic)
        } else {
            tracing::warn!("delivery to {} failed: {}; sending again", f.out.topic, f.error);
            tokio::select! {
                _ = stop.cancelled() => return,
                _ = tokio::time::sleep(RETRY_BACKOFF) => {}
            }
            f
        };
        match sink.send(f.out, f.ticket).await {
            Ok(()) => {}
            Err(SendError::Kafka(f)) => {
                let _ = tx.send(f);
            }
            Err(SendError::Io(e)) => tracing::error!("cannot write output: {e}"),
        }
    }
}
