//! The acknowledgement ticket every output carries: when the sink confirms delivery it counts the output, observes end-to-end latency and advances the source partition's watermark.

use std::sync::Arc;

use crate::io::message::OutKind;
use crate::metrics::Metrics;
use crate::runtime::watermark::PartitionTrack;

/// Called with each end-to-end latency in seconds (the bench records exact quantiles with it).
pub type LatencyHook = Arc<dyn Fn(f64) + Send + Sync>;

/// Shared by every ticket of one service instance.
pub struct AckShared {
    pub metrics: Arc<Metrics>,
    pub latency_hook: Option<LatencyHook>,
}

/// One in-flight record: which partition and offset it came from and what its output is.
pub struct AckTicket {
    track: Arc<PartitionTrack>,
    offset: i64,
    input_timestamp_ms: Option<i64>,
    kind: OutKind,
    shared: Arc<AckShared>,
}

impl AckTicket {
    /// Begin tracking `offset` (in flight until `acked`).
    pub fn begin(
        track: Arc<PartitionTrack>,
        offset: i64,
        input_timestamp_ms: Option<i64>,
        kind: OutKind,
        shared: Arc<AckShared>,
    ) -> AckTicket {
        track.begin(offset);
        shared.metrics.in_flight.inc();
        AckTicket { track, offset, input_timestamp_ms, kind, shared }
    }

    pub fn shared_metrics(&self) -> &Metrics {
        &self.shared.metrics
    }

    pub fn kind(&self) -> &OutKind {
        &self.kind
    }

    /// The output now goes somewhere else (a dead letter after a failed delivery).
    pub fn set_kind(&mut self, kind: OutKind) {
        self.kind = kind;
    }

    /// The sink confirmed the output.
    pub fn acked(self) {
        let m = &self.shared.metrics;
        match &self.kind {
            OutKind::Decision { class } => {
                m.records_out.inc();
                m.decisions.with_label_values(&[class.as_ref()]).inc();
            }
            OutKind::Review { class } => {
                m.records_reviewed.inc();
                m.decisions.with_label_values(&[class.as_ref()]).inc();
            }
            OutKind::DeadLetter { reason } => m.dead_lettered.with_label_values(&[reason]).inc(),
            OutKind::Label => m.labels_resolved.inc(),
        }
        if let Some(ts) = self.input_timestamp_ms {
            let secs = (crate::runtime::now_ms() - ts).max(0) as f64 / 1000.0;
            m.end_to_end_latency.observe(secs);
            if let Some(hook) = &self.shared.latency_hook {
                hook(secs);
            }
        }
        m.in_flight.dec();
        self.track.ack(self.offset);
    }
}
