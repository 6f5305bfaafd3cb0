//! The Kafka sink: an idempotent producer whose delivery callback acknowledges each output's ticket; failed deliveries are sent again (to dead letters if the topic is gone), never dropped.

use std::borrow::Cow;
use std::sync::Arc;
use std::time::Duration;

use rdkafka::error::{KafkaError, RDKafkaErrorCode};
use rdkafka::message::{Header, Headers, Message, OwnedHeaders};
use rdkafka::producer::{BaseRecord, DeliveryResult, Producer, ProducerContext, ThreadedProducer};
use rdkafka::ClientContext;
use tokio::sync::mpsc;

use crate::io::headers as h;
use crate::io::message::{OutKind, Outgoing};
use crate::runtime::ack::AckTicket;

/// A delivery that failed, to be sent again by the retry task.
pub struct Failed {
    pub out: Outgoing,
    pub ticket: AckTicket,
    pub error: KafkaError,
}

/// Producer callbacks: acks go to tickets, failures to the retry channel.
pub struct SinkContext {
    pub retry: mpsc::UnboundedSender<Failed>,
}

impl ClientContext for SinkContext {}

impl ProducerContext for SinkContext {
    type DeliveryOpaque = Box<Pending>;

    fn delivery(&self, result: &DeliveryResult<'_>, pending: Box<Pending>) {
        match result {
            Ok(_) => pending.ticket.acked(),
            Err((error, msg)) => {
                let mut headers = Vec::new();
                if let Some(hs) = msg.headers() {
                    for hd in hs.iter() {
                        headers.push((Cow::Owned(hd.key.to_string()), hd.value.unwrap_or_default().to_vec()));
                    }
                }
                let out = Outgoing {
                    topic: msg.topic().to_string(),
                    key: msg.key().map(<[u8]>::to_vec),
                    payload: msg.payload().unwrap_or_default().to_vec(),
                    headers,
                    kind: pending.ticket.kind().clone(),
                };
                // The receiver lives as long as the sink; if it is gone the process is ending
                // and the offset was never stored, so the record is read again.
                let _ = self.retry.send(Failed { out, ticket: pending.ticket, error: error.clone() });
            }
        }
    }
}

/// What rides with each produced message.
pub struct Pending {
    ticket: AckTicket,
}

/// The Kafka sink.
pub struct KafkaSink {
    producer: Arc<ThreadedProducer<SinkContext>>,
}

impl KafkaSink {
    /// The producer and the receiving end of failed deliveries.
    pub fn new(config: &rdkafka::ClientConfig) -> Result<(KafkaSink, mpsc::UnboundedReceiver<Failed>), KafkaError> {
        let (tx, rx) = mpsc::unbounded_channel();
        let producer: ThreadedProducer<SinkContext> = config.create_with_context(SinkContext { retry: tx })?;
        Ok((KafkaSink { producer: Arc::new(producer) }, rx))
    }

    pub fn producer(&self) -> &Arc<ThreadedProducer<SinkContext>> {
        &self.producer
    }

    /// Hand `out` to the producer; waits while its queue is full. Errors that are not
    /// about the queue are returned with the ticket so the caller can reroute.
    pub async fn send(&self, out: Outgoing, ticket: AckTicket) -> Result<(), Failed> {
        let mut headers = OwnedHeaders::new_with_capacity(out.headers.len());
        for (k, v) in &out.headers {
            headers = headers.insert(Header { key: k.as_ref(), value: Some(v.as_slice()) });
        }
        let mut record = BaseRecord::with_opaque_to(&out.topic, Box::new(Pending { ticket }))
            .payload(out.payload.as_slice())
            .headers(headers);
        if let Some(k) = &out.key {
            record = record.key(k.as_slice());
        }
        let mut waited = false;
        loop {
            match self.producer.send(record) {
                Ok(()) => return Ok(()),
                Err((KafkaError::MessageProduction(RDKafkaErrorCode::QueueFull), back)) => {
                    if !waited {
                        waited = true;
                        back.delivery_opaque.ticket.shared_metrics().output_retries.inc();
                    }
                    record = back;
                    tokio::time::sleep(Duration::from_millis(1)).await;
                }
                Err((error, back)) => {
                    let ticket = back.delivery_opaque.ticket;
                    return Err(Failed { out, ticket, error });
                }
            }
        }
    }

    /// Wait for every queued message to be delivered (or `timeout`).
    pub async fn flush(&self, timeout: Duration) -> Result<(), KafkaError> {
        let p = self.producer.clone();
        tokio::task::spawn_blocking(move || p.flush(timeout)).await.unwrap_or(Ok(()))
    }

    /// Messages queued in the producer and not yet delivered.
    pub fn queued(&self) -> i32 {
        self.producer.in_flight_count()
    }
}

/// Is this delivery error the broker saying the topic does not exist?
pub fn is_unknown_topic(e: &KafkaError) -> bool {
    matches!(
        e.rdkafka_error_code(),
        Some(
            RDKafkaErrorCode::UnknownTopicOrPartition
                | RDKafkaErrorCode::UnknownTopic
                | RDKafkaErrorCode::UnknownPartition
        )
    )
}

/// Turn a failed decision into a dead letter for an unknown destination (the payload
/// keeps the decision with the original record in it).
pub fn reroute_unknown(mut f: Failed, dead_topic: &str) -> Failed {
    let lost = std::mem::replace(&mut f.out.topic, dead_topic.to_string());
    f.out.headers.push((Cow::Borrowed(h::REASON), h::REASON_UNKNOWN_DESTINATION.as_bytes().to_vec()));
    f.out.headers.push((Cow::Borrowed(h::ERROR), format!("topic {lost} does not exist").into_bytes()));
    let kind = OutKind::DeadLetter { reason: h::REASON_UNKNOWN_DESTINATION };
    f.out.kind = kind.clone();
    f.ticket.set_kind(kind);
    f
}
