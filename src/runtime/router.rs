//! One record in, one output out: decode, analyze, score against one model view, and pick the destination (class topic, review topic or dead letters). Pure and synchronous.

use std::borrow::Cow;
use std::sync::Arc;

use crate::decide::{decide_by_model, DecideScratch, Decision, ReviewPolicy};
use crate::io::codec::{Codec, Decoded};
use crate::io::headers as h;
use crate::io::message::{Inbound, OutKind, Outgoing};
use crate::model::{ScoreScratch, Scored};
use crate::runtime::model_view::ModelView;
use crate::settings::{CodecKind, Settings};
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

/// The destination topic of a class: a template with `{class}` placeholders.
#[derive(Debug, Clone)]
pub struct TopicTemplate(String);

impl TopicTemplate {
    pub fn new(template: &str) -> TopicTemplate {
        TopicTemplate(template.to_string())
    }

    /// The topic for `class`; characters a topic name cannot hold become `_`.
    pub fn topic(&self, class: &str) -> String {
        crate::settings::fill_topic_template(&self.0, class)
    }
}

/// Buffers reused across records by one worker.
#[derive(Debug, Default)]
pub struct RouteScratch {
    decoded: Decoded,
    analyzer: AnalyzerScratch,
    bag: TermBag,
    decide: DecideScratch,
    /// The model's score of the last routed record, when the model scored it (read by the drift observer).
    scored: Option<Scored>,
}

impl RouteScratch {
    /// The last routed record's analyzed terms.
    pub fn bag(&self) -> &TermBag {
        &self.bag
    }

    /// The last routed record's text fields and weights, as decoded.
    pub fn fields(&self) -> &[(String, f64)] {
        &self.decoded.fields
    }

    /// The model's score of the last routed record and the scratch it left (rows found), if the model scored it.
    pub fn model_score(&self) -> Option<(&Scored, &ScoreScratch)> {
        self.scored.as_ref().map(|s| (s, &self.decide.score))
    }
}

impl RouteScratch {
    /// The analyzed terms of the last record routed.
    pub fn terms(&self) -> &TermBag {
        &self.bag
    }
}

/// Everything needed to turn an input into an output, built once from settings.
#[derive(Debug)]
pub struct Router {
    codec: Codec,
    analyzer: Analyzer,
    policy: ReviewPolicy,
    explain_terms: usize,
    template: TopicTemplate,
    review_topic: String,
    dead_topic: String,
}

impl Router {
    pub fn new(settings: &Settings) -> Result<Router, regex::Error> {
        Ok(Router {
            codec: Codec::new(settings.source.codec, &settings.input),
            analyzer: Analyzer::new(&settings.analyzer)?,
            policy: ReviewPolicy::from_settings(&settings.review),
            explain_terms: settings.model.explain_terms,
            template: TopicTemplate::new(&settings.routing.topic_template),
            review_topic: settings.routing.review_topic.clone(),
            dead_topic: settings.dead_letter.topic.clone(),
        })
    }

    pub fn dead_letter_topic(&self) -> &str {
        &self.dead_topic
    }

    pub fn review_topic(&self) -> &str {
        &self.review_topic
    }

    /// Route one record against one view. The returned decision is `None` for dead letters.
    pub fn route(&self, view: &ModelView, rec: &Inbound<'_>, s: &mut RouteScratch) -> (Outgoing, Option<Decision>) {
        s.scored = None;
        if let Err(e) = self.codec.decode(rec.payload, &mut s.decoded) {
            return (self.dead_letter(rec, e.reason(), None), None);
        }
        self.analyzer.analyze_fields(
            s.decoded.fields.iter().map(|(t, w)| (t.as_str(), *w)),
            &mut s.analyzer,
            &mut s.bag,
        );
        let (decision, scored) = decide_by_model(
            &view.model,
            &view.meta.model_version,
            s.decoded.id.take(),
            &s.bag,
            &self.policy,
            self.explain_terms,
            &mut s.decide,
        );
        s.scored = Some(scored);
        let class = view.classes[scored.best].clone();
        let payload = decision_payload(&decision, rec.payload.unwrap_or_default(), self.codec.kind());
        let mut headers = Vec::with_capacity(7);
        headers.push((Cow::Borrowed(h::CLASS), class.as_bytes().to_vec()));
        headers.push((Cow::Borrowed(h::CONFIDENCE), format!("{}", decision.confidence).into_bytes()));
        headers.push((Cow::Borrowed(h::DECIDED_BY), decision.decided_by.label().into_bytes()));
        let (topic, kind) = match &decision.review {
            Some(reason) => {
                headers.push((Cow::Borrowed(h::REVIEW_REASON), reason.label().as_bytes().to_vec()));
                (self.review_topic.clone(), OutKind::Review { class })
            }
            None => (self.template.topic(&class), OutKind::Decision { class }),
        };
        push_source(&mut headers, rec);
        (Outgoing { topic, key: rec.key.map(<[u8]>::to_vec), payload, headers, kind }, Some(decision))
    }

    /// A dead letter: the original bytes, key and headers, plus reason and source headers.
    pub fn dead_letter(&self, rec: &Inbound<'_>, reason: &'static str, detail: Option<String>) -> Outgoing {
        let mut headers: Vec<(Cow<'static, str>, Vec<u8>)> =
            rec.headers.iter().map(|(n, v)| (Cow::Owned(n.to_string()), v.to_vec())).collect();
        headers.push((Cow::Borrowed(h::REASON), reason.as_bytes().to_vec()));
        if let Some(d) = detail {
            headers.push((Cow::Borrowed(h::ERROR), d.into_bytes()));
        }
        push_source(&mut headers, rec);
        Outgoing {
            topic: self.dead_topic.clone(),
            key: rec.key.map(<[u8]>::to_vec),
            payload: rec.payload.unwrap_or_default().to_vec(),
            headers,
            kind: OutKind::DeadLetter { reason },
        }
    }
}

fn push_source(headers: &mut Vec<(Cow<'static, str>, Vec<u8>)>, rec: &Inbound<'_>) {
    headers.push((Cow::Borrowed(h::SOURCE_TOPIC), rec.topic.as_bytes().to_vec()));
    headers.push((Cow::Borrowed(h::SOURCE_PARTITION), rec.partition.to_string().into_bytes()));
    headers.push((Cow::Borrowed(h::SOURCE_OFFSET), rec.offset.to_string().into_bytes()));
}

/// The decision as JSON with the original record appended unchanged under `record`
/// (JSON records as their own bytes, text records as a string).
fn decision_payload(d: &Decision, original: &[u8], codec: CodecKind) -> Vec<u8> {
    let mut buf = Vec::with_capacity(256 + original.len());
    serde_json::to_writer(&mut buf, d).expect("a decision serializes");
    debug_assert_eq!(buf.last(), Some(&b'}'));
    buf.pop();
    buf.extend_from_slice(b",\"record\":");
    match codec {
        CodecKind::Json => {
            let trimmed = original.trim_ascii();
            if trimmed.contains(&b'\n') || trimmed.contains(&b'\r') {
                // Keep one output per line for line sinks: re-encode compactly.
                let v: serde_json::Value = serde_json::from_slice(trimmed).expect("decoded before");
                serde_json::to_writer(&mut buf, &v).expect("a value serializes");
            } else {
                buf.extend_from_slice(trimmed);
            }
        }
        CodecKind::Text => {
            let line = std::str::from_utf8(original).expect("decoded before").trim_end_matches(['\n', '\r']);
            serde_json::to_writer(&mut buf, line).expect("a string serializes");
        }
    }
    buf.push(b'}');
    buf
}

/// Classes routed so far are bounded by the model; this names a class for a metric label.
pub fn class_label(kind: &OutKind) -> Option<&Arc<str>> {
    match kind {
        OutKind::Decision { class } | OutKind::Review { class } => Some(class),
        OutKind::DeadLetter { .. } | OutKind::Label => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn template_substitutes_and_sanitises() {
        let t = TopicTemplate::new("tickets.routed.{class}");
        assert_eq!(t.topic("billing"), "tickets.routed.billing");
        assert_eq!(t.topic("lost parcel/äö"), "tickets.routed.lost_parcel___");
        assert_eq!(TopicTemplate::new("all.decisions").topic("x"), "all.decisions");
    }
}
