//! One record in, one output out: decode, analyze, decide against one model view and one rules set (the blend seam, `Decider`), and pick the destination (class topic, review topic or dead letters). Pure and synchronous.

use std::borrow::Cow;
use std::sync::Arc;

use crate::decide::{BlendScratch, Decider, Decision};
use crate::io::codec::{Codec, Decoded};
use crate::io::headers as h;
use crate::io::message::{Inbound, OutKind, Outgoing};
use crate::model::{ScoreScratch, Scored};
use crate::rules::{FieldText, RuleSet};
use crate::runtime::model_view::ModelView;
use crate::settings::{CodecKind, Settings};
use crate::text::{Analyzer, TermBag};

/// Records with up to this many text fields are decided without a heap allocation.
const INLINE_FIELDS: usize = 8;

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

/// Buffers reused across records by one worker; valid across model and rules swaps.
#[derive(Debug, Default)]
pub struct RouteScratch {
    decoded: Decoded,
    blend: BlendScratch,
}

impl RouteScratch {
    /// The analyzed terms of the last record routed.
    pub fn terms(&self) -> &TermBag {
        &self.blend.terms.bag
    }

    /// The same, under the name the drift observer uses.
    pub fn bag(&self) -> &TermBag {
        &self.blend.terms.bag
    }

    /// The last routed record's text fields and weights, as decoded.
    pub fn fields(&self) -> &[(String, f64)] {
        &self.decoded.fields
    }

    /// The model's own score of the last routed record and the scratch it left
    /// (the rows it found), if the model scored it (a rule may decide alone).
    pub fn model_score(&self) -> Option<(&Scored, &ScoreScratch)> {
        self.blend.work.model_scored.as_ref().map(|s| (s, &self.blend.work.score))
    }
}

/// Everything needed to turn an input into an output, built once from settings.
#[derive(Debug)]
pub struct Router {
    codec: Codec,
    analyzer: Analyzer,
    decider: Decider,
    template: TopicTemplate,
    review_topic: String,
    dead_topic: String,
}

impl Router {
    pub fn new(settings: &Settings) -> Result<Router, regex::Error> {
        Ok(Router {
            codec: Codec::new(settings.source.codec, &settings.input),
            analyzer: Analyzer::new(&settings.analyzer)?,
            decider: Decider::from_settings(settings),
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

    /// Route one record against one model view and one rules set (`None`: no
    /// rules). The returned decision is `None` for dead letters.
    pub fn route(
        &self,
        view: &ModelView,
        rules: Option<&RuleSet>,
        rec: &Inbound<'_>,
        s: &mut RouteScratch,
    ) -> (Outgoing, Option<Decision>) {
        let RouteScratch { decoded, blend } = s;
        if let Err(e) = self.codec.decode(rec.payload, decoded) {
            return (self.dead_letter(rec, e.reason(), None), None);
        }
        let texts = decoded.fields.iter().zip(&decoded.slots).map(|((t, w), &f)| FieldText { field: f, text: t, weight: *w });
        let mut inline = [FieldText { field: 0, text: "", weight: 0.0 }; INLINE_FIELDS];
        let spilled: Vec<FieldText<'_>>;
        let fields: &[FieldText<'_>] = if decoded.fields.len() <= INLINE_FIELDS {
            let n = inline.iter_mut().zip(texts).map(|(slot, f)| *slot = f).count();
            &inline[..n]
        } else {
            spilled = texts.collect();
            &spilled
        };
        let decision = self.decider.decide(
            &self.analyzer,
            rules,
            Some(&view.model),
            &view.meta.model_version,
            decoded.id.take(),
            fields,
            blend,
        );
        // Model classes are shared; a class only a rule names (or none) is allocated.
        let class = view
            .classes
            .iter()
            .find(|c| ***c == *decision.class)
            .cloned()
            .unwrap_or_else(|| Arc::from(decision.class.as_str()));
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

    fn view(settings: &Settings) -> ModelView {
        use crate::features::Vocabulary;
        use crate::model::snapshot::SnapshotMeta;
        use crate::model::{Model, NbParams};
        let a = Analyzer::new(&settings.analyzer).unwrap();
        let voc = Vocabulary::new(settings.model.vocabulary, 1000, 0);
        let classes = vec!["billing".to_string(), "shipping".to_string()];
        let mut m = Model::new(NbParams::multinomial(1.0), settings.analyzer.clone(), classes, voc).unwrap();
        let mut bag = crate::text::TermBag::new();
        let mut sc = crate::text::AnalyzerScratch::default();
        for (text, class) in [("charged twice invoice", "billing"), ("parcel late courier", "shipping")] {
            a.analyze_fields([(text, 1.0)], &mut sc, &mut bag);
            m.learn(&bag, class, 1.0).unwrap();
        }
        let meta = SnapshotMeta::fresh(&m, Some("t".into()));
        ModelView::new(m, meta, "00".repeat(32), "test".into())
    }

    fn inbound(payload: &[u8]) -> Inbound<'_> {
        Inbound { topic: "in", partition: 0, offset: 0, key: None, payload: Some(payload), headers: Vec::new(), timestamp_ms: None }
    }

    fn header(o: &Outgoing, name: &str) -> String {
        String::from_utf8(o.header(name).expect(name).to_vec()).unwrap()
    }

    #[test]
    fn rules_decide_in_the_router_with_field_scope_and_unmatched_records_go_to_review() {
        let mut settings = Settings::defaults();
        settings.rules.blend = crate::settings::BlendMode::RulesOnly;
        let rules = crate::rules::from_str(
            "[[rule]]\nid = \"subject-refund\"\nclass = \"returns\"\naction = \"assign\"\n[[rule.when]]\nfield = \"subject\"\nany = [\"refund\"]\n",
            "inline",
            &Analyzer::new(&settings.analyzer).unwrap(),
            &crate::rules::field_names(&settings),
        )
        .unwrap();
        let router = Router::new(&settings).unwrap();
        let view = view(&settings);
        let mut s = RouteScratch::default();

        let (out, d) = router.route(&view, Some(&rules), &inbound(br#"{"id":"a","subject":"refund please","body":"x"}"#), &mut s);
        assert_eq!(d.unwrap().decided_by, crate::decide::DecidedBy::Rule("subject-refund".into()));
        assert_eq!(header(&out, h::DECIDED_BY), "rule:subject-refund");
        assert_eq!(header(&out, h::CLASS), "returns", "a class only the rules know");
        assert_eq!(out.topic, "sieveline.routed.returns");

        // The word in the body only: the rule is scoped to the subject, and in
        // rules_only nobody else decides.
        let (out, d) = router.route(&view, Some(&rules), &inbound(br#"{"id":"b","subject":"hello","body":"refund"}"#), &mut s);
        assert_eq!(d.unwrap().decided_by, crate::decide::DecidedBy::Nobody);
        assert_eq!(out.topic, "sieveline.review");
        assert_eq!(header(&out, h::REVIEW_REASON), "unmatched");
        assert_eq!(header(&out, h::DECIDED_BY), "none");

        // Without rules, under the default blend, the model decides as before.
        let router = Router::new(&Settings::defaults()).unwrap();
        let (out, d) = router.route(&view, None, &inbound(br#"{"id":"c","subject":"parcel late"}"#), &mut s);
        let d = d.unwrap();
        assert_eq!((d.decided_by, d.class.as_str()), (crate::decide::DecidedBy::Model, "shipping"));
        assert_eq!(header(&out, h::DECIDED_BY), "model");
    }
}
