//! Resolving id-only labels in the record loop: scored records are remembered by id in the bounded recent-record cache, and a raw label read from the co-partitioned raw label topic becomes a complete event on the learned-label topic, or a dead letter.

use std::borrow::Cow;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use crate::io::headers as h;
use crate::io::message::{Inbound, OutKind, Outgoing};
use crate::learn::{resolve, CachedRecord, IdOnlyLabel, PackedTerms, RecentCache};
use crate::metrics::Metrics;
use crate::runtime::model_view::ModelView;
use crate::settings::{Settings, UnknownClasses};
use crate::text::TermBag;

pub struct Resolver {
    /// The raw label topic this resolver answers.
    pub raw_topic: String,
    label_topic: String,
    dead_topic: String,
    allow_new_classes: bool,
    cache: Mutex<RecentCache>,
    metrics: Arc<Metrics>,
}

impl Resolver {
    /// `None` unless learning is on with a raw label topic.
    pub fn from_settings(s: &Settings, metrics: Arc<Metrics>) -> Option<Resolver> {
        let l = &s.learning;
        if !l.enabled || l.raw_label_topic.is_empty() {
            return None;
        }
        metrics.recent_records_limit.set(l.recent_capacity as i64);
        Some(Resolver {
            raw_topic: l.raw_label_topic.clone(),
            label_topic: l.label_topic.clone(),
            dead_topic: s.dead_letter.topic.clone(),
            allow_new_classes: l.unknown_classes == UnknownClasses::Add,
            cache: Mutex::new(RecentCache::new(l.recent_capacity, Duration::from_millis(l.recent_ttl_ms))),
            metrics,
        })
    }

    /// Keep a scored record's terms for a later id-only label.
    pub fn remember(&self, id: &str, terms: &TermBag, class: Arc<str>, partition: i32) {
        let rec = CachedRecord { terms: PackedTerms::pack(terms), class, partition, scored_ms: crate::clock::unix_millis() };
        let mut c = self.cache.lock().expect("recent cache lock");
        c.insert(id, rec, Instant::now());
        self.metrics.recent_records.set(c.len() as i64);
    }

    /// The output of one raw label: a complete event keyed by record id for the
    /// learned-label topic, or a dead letter saying why not.
    pub fn resolve(&self, rec: &Inbound<'_>, view: &ModelView) -> Outgoing {
        let payload = rec.payload.unwrap_or_default();
        let result = IdOnlyLabel::parse(payload).and_then(|label| {
            let mut c = self.cache.lock().expect("recent cache lock");
            let r = resolve(&label, &mut c, Instant::now(), |k| view.model.class_index(k).is_some(), self.allow_new_classes);
            self.metrics.recent_records.set(c.len() as i64);
            r
        });
        let mut headers: Vec<(Cow<'static, str>, Vec<u8>)> = Vec::with_capacity(5);
        let (topic, key, body, kind) = match result {
            Ok(event) => (self.label_topic.clone(), Some(event.id.clone().into_bytes()), event.to_json(), OutKind::Label),
            Err(r) => {
                self.metrics.labels_rejected.with_label_values(&[r.reason()]).inc();
                headers.push((Cow::Borrowed(h::REASON), r.reason().as_bytes().to_vec()));
                headers.push((Cow::Borrowed(h::ERROR), r.to_string().into_bytes()));
                let kind = OutKind::DeadLetter { reason: r.reason() };
                (self.dead_topic.clone(), rec.key.map(<[u8]>::to_vec), payload.to_vec(), kind)
            }
        };
        headers.push((Cow::Borrowed(h::SOURCE_TOPIC), rec.topic.as_bytes().to_vec()));
        headers.push((Cow::Borrowed(h::SOURCE_PARTITION), rec.partition.to_string().into_bytes()));
        headers.push((Cow::Borrowed(h::SOURCE_OFFSET), rec.offset.to_string().into_bytes()));
        Outgoing { topic, key, payload: body, headers, kind }
    }
}
