//! Label events: the complete form every replica learns from, the id-only form reviewers send, and the reasons an event is refused.
//!
//! Complete (the learned-label topic):
//! ```json
//! {"id": "t-1042", "class": "returns", "fields": {"subject": "...", "body": "..."}}
//! {"id": "t-1042", "class": "returns", "features": [["refund", 2.0], ["<num>", 1.0]], "replaces": "billing"}
//! ```
//! Id-only (the raw label topic): `{"id": "t-1042", "class": "returns", "partition": 3}`;
//! `partition` is copied from the decision when input records are not keyed by id.
//! Optional in both: `weight` (a multiple of 1/16, default 1), `reviewer`, `ts`.
//! A complete event made by resolving an id-only label also carries
//! `scored_ms`, when the resolving replica scored the record (Unix ms), for
//! the label-delay statistic; it never changes what is learned.

use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};

use crate::text::bag::FeatureList;

/// Why a label event was refused; each becomes a dead letter with this reason.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LabelReject {
    #[error("malformed label: {0}")]
    Malformed(String),
    #[error("missing field: {0}")]
    MissingField(&'static str),
    #[error("unknown class: {0:?}")]
    UnknownClass(String),
    #[error("unknown id: {0:?} is not in the recent-record cache")]
    UnknownId(String),
    #[error("bad weight {0}")]
    BadWeight(f64),
    #[error("cannot correct: the record was not learned as {0:?}")]
    NotLearned(String),
}

/// Every `LabelReject::reason`, for metrics initialisation and docs.
pub const REASONS: &[&str] = &["malformed label", "missing field", "unknown class", "unknown id", "bad weight", "not learned"];

impl LabelReject {
    /// The short reason used in dead-letter headers and metric labels.
    pub fn reason(&self) -> &'static str {
        match self {
            LabelReject::Malformed(_) => "malformed label",
            LabelReject::MissingField(_) => "missing field",
            LabelReject::UnknownClass(_) => "unknown class",
            LabelReject::UnknownId(_) => "unknown id",
            LabelReject::BadWeight(_) => "bad weight",
            LabelReject::NotLearned(_) => "not learned",
        }
    }
}

/// What a complete event carries about the record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LabelSource {
    /// Raw fields, analyzed by the folding replica with its settings.
    Fields(Map<String, Value>),
    /// Already analyzed terms with weights.
    Features(FeatureList),
}

/// A complete label event: enough to learn from without any other state.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LabelEvent {
    pub id: String,
    pub class: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fields: Option<Map<String, Value>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub features: Option<FeatureList>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub replaces: Option<String>,
    pub weight: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub scored_ms: Option<i64>,
}

/// An id-only label as reviewers send it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IdOnlyLabel {
    pub id: String,
    pub class: String,
    pub replaces: Option<String>,
    pub partition: Option<i32>,
    pub weight: f64,
}

fn parse_object(bytes: &[u8]) -> Result<Map<String, Value>, LabelReject> {
    let text = std::str::from_utf8(bytes).map_err(|_| LabelReject::Malformed("not valid UTF-8".into()))?;
    match serde_json::from_str::<Value>(text) {
        Ok(Value::Object(m)) => Ok(m),
        Ok(_) => Err(LabelReject::Malformed("not a JSON object".into())),
        Err(e) => Err(LabelReject::Malformed(e.to_string())),
    }
}

fn string(m: &Map<String, Value>, key: &'static str) -> Result<Option<String>, LabelReject> {
    match m.get(key) {
        None | Some(Value::Null) => Ok(None),
        Some(Value::String(s)) if s.trim().is_empty() => Err(LabelReject::MissingField(key)),
        Some(Value::String(s)) => Ok(Some(s.trim().to_string())),
        Some(Value::Number(n)) if key == "id" => Ok(Some(n.to_string())),
        Some(_) => Err(LabelReject::Malformed(format!("{key} must be a string"))),
    }
}

fn weight(m: &Map<String, Value>) -> Result<f64, LabelReject> {
    match m.get("weight") {
        None | Some(Value::Null) => Ok(1.0),
        Some(Value::Number(n)) => {
            let w = n.as_f64().unwrap_or(f64::NAN);
            crate::settings::check_weight("weight", w).map_err(|_| LabelReject::BadWeight(w))?;
            Ok(w)
        }
        Some(_) => Err(LabelReject::Malformed("weight must be a number".into())),
    }
}

impl LabelEvent {
    /// Parse and validate a complete event.
    pub fn parse(bytes: &[u8]) -> Result<LabelEvent, LabelReject> {
        let m = parse_object(bytes)?;
        let id = string(&m, "id")?.ok_or(LabelReject::MissingField("id"))?;
        let class = string(&m, "class")?.ok_or(LabelReject::MissingField("class"))?;
        let replaces = string(&m, "replaces")?;
        let weight = weight(&m)?;
        let fields = match m.get("fields") {
            None | Some(Value::Null) => None,
            Some(Value::Object(f)) => Some(f.clone()),
            Some(_) => return Err(LabelReject::Malformed("fields must be an object".into())),
        };
        let features = match m.get("features") {
            None | Some(Value::Null) => None,
            Some(v) => Some(
                serde_json::from_value::<FeatureList>(v.clone())
                    .map_err(|e| LabelReject::Malformed(format!("features: {e}")))?,
            ),
        };
        if fields.is_none() && features.is_none() {
            return Err(LabelReject::MissingField("fields or features"));
        }
        if let Some(f) = &features {
            for (_, w) in &f.0 {
                let q = w * 16.0;
                if !(w.is_finite() && *w > 0.0 && q == q.trunc()) {
                    return Err(LabelReject::BadWeight(*w));
                }
            }
        }
        let scored_ms = match m.get("scored_ms") {
            None | Some(Value::Null) => None,
            Some(v) => Some(v.as_i64().ok_or_else(|| LabelReject::Malformed("scored_ms must be an integer".into()))?),
        };
        Ok(LabelEvent { id, class, fields, features, replaces, weight, scored_ms })
    }

    pub fn to_json(&self) -> Vec<u8> {
        serde_json::to_vec(self).expect("label event serializes")
    }
}

impl IdOnlyLabel {
    pub fn parse(bytes: &[u8]) -> Result<IdOnlyLabel, LabelReject> {
        let m = parse_object(bytes)?;
        let id = string(&m, "id")?.ok_or(LabelReject::MissingField("id"))?;
        let class = string(&m, "class")?.ok_or(LabelReject::MissingField("class"))?;
        let replaces = string(&m, "replaces")?;
        let partition = match m.get("partition") {
            None | Some(Value::Null) => None,
            Some(Value::Number(n)) => Some(
                n.as_i64()
                    .and_then(|p| i32::try_from(p).ok())
                    .filter(|p| *p >= 0)
                    .ok_or_else(|| LabelReject::Malformed("partition must be a non-negative integer".into()))?,
            ),
            Some(_) => return Err(LabelReject::Malformed("partition must be a number".into())),
        };
        Ok(IdOnlyLabel { id, class, replaces, partition, weight: weight(&m)? })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn complete_events_parse_with_fields_or_features() {
        let e = LabelEvent::parse(br#"{"id":"t1","class":"returns","fields":{"subject":"Refund"}}"#).unwrap();
        assert_eq!(e.class, "returns");
        assert!(e.fields.is_some() && e.features.is_none() && e.replaces.is_none());
        assert_eq!(e.weight, 1.0);
        let e = LabelEvent::parse(br#"{"id":7,"class":"billing","features":[["refund",2.0]],"replaces":"returns","weight":0.5}"#).unwrap();
        assert_eq!(e.id, "7");
        assert_eq!(e.replaces.as_deref(), Some("returns"));
        assert_eq!(e.features.unwrap().0, vec![("refund".to_string(), 2.0)]);
        let back = LabelEvent::parse(&LabelEvent::parse(br#"{"id":"a","class":"b","features":[["x",1.0]]}"#).unwrap().to_json()).unwrap();
        assert_eq!(back.id, "a");
    }

    #[test]
    fn bad_events_are_refused_with_a_reason() {
        let cases: &[(&[u8], &str)] = &[
            (b"{not json", "malformed label"),
            (b"[1]", "malformed label"),
            (b"\xff\xfe", "malformed label"),
            (br#"{"class":"a","fields":{}}"#, "missing field"),
            (br#"{"id":"x","fields":{}}"#, "missing field"),
            (br#"{"id":"x","class":"  ","fields":{}}"#, "missing field"),
            (br#"{"id":"x","class":"a"}"#, "missing field"),
            (br#"{"id":"x","class":"a","fields":{},"weight":0.3}"#, "bad weight"),
            (br#"{"id":"x","class":"a","features":[["t",0.1]]}"#, "bad weight"),
            (br#"{"id":"x","class":"a","features":"nope"}"#, "malformed label"),
        ];
        for (bytes, reason) in cases {
            let e = LabelEvent::parse(bytes).unwrap_err();
            assert_eq!(e.reason(), *reason, "{}", String::from_utf8_lossy(bytes));
        }
    }

    #[test]
    fn id_only_labels() {
        let l = IdOnlyLabel::parse(br#"{"id":"t9","class":"shipping","partition":3}"#).unwrap();
        assert_eq!((l.id.as_str(), l.class.as_str(), l.partition), ("t9", "shipping", Some(3)));
        assert_eq!(IdOnlyLabel::parse(br#"{"id":"t9","class":"s","partition":-1}"#).unwrap_err().reason(), "malformed label");
        assert_eq!(IdOnlyLabel::parse(br#"{"class":"s"}"#).unwrap_err().reason(), "missing field");
    }
}
