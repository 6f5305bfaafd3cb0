//! The sink a service writes to: Kafka, or lines on stdout or in a file; one `send` for all, acknowledging through the output's ticket.

use std::sync::Arc;
use std::time::Duration;

use crate::io::kafka::producer::{Failed, KafkaSink};
use crate::io::kafka::topics::KnownTopics;
use crate::io::lines::LineSink;
use crate::io::message::Outgoing;
use crate::runtime::ack::AckTicket;

/// Why a send did not go through.
pub enum SendError {
    /// The Kafka client refused the message; it can be rerouted or sent again.
    Kafka(Failed),
    /// A line sink cannot write: the service stops (the record's offset is not stored).
    Io(std::io::Error),
}

pub enum Sink {
    Kafka { sink: KafkaSink, topics: Arc<KnownTopics> },
    Lines(LineSink),
}

impl Sink {
    /// Does the destination exist? Line sinks take every destination.
    pub async fn destination_exists(&self, topic: &str) -> bool {
        match self {
            Sink::Kafka { topics, .. } => topics.exists(topic).await,
            Sink::Lines(_) => true,
        }
    }

    /// Hand over one output. A Kafka send that the client refuses at once comes back as `Failed`.
    pub async fn send(&self, out: Outgoing, ticket: AckTicket) -> Result<(), SendError> {
        match self {
            Sink::Kafka { sink, .. } => sink.send(out, ticket).await.map_err(SendError::Kafka),
            Sink::Lines(l) => {
                l.write(&out).map_err(SendError::Io)?;
                ticket.acked();
                Ok(())
            }
        }
    }

    pub async fn flush(&self, timeout: Duration) {
        match self {
            Sink::Kafka { sink, .. } => {
                if let Err(e) = sink.flush(timeout).await {
                    tracing::warn!("producer flush: {e}");
                }
            }
            Sink::Lines(l) => {
                if let Err(e) = l.flush() {
                    tracing::error!("cannot flush output: {e}");
                }
            }
        }
    }
}
