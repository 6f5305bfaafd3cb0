//! Record codecs for the streaming edges: bytes → the text fields the analyzer reads (JSON with field paths and weights, or one plain text line), or the reason it cannot be read.

use serde_json::Value;

use crate::io::record::{field_text, json_path};
use crate::settings::{CodecKind, FieldSetting, InputSettings};

/// Why a record cannot be decoded; the strings are the dead-letter reason header values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum DecodeError {
    BadJson,
    InvalidUtf8,
    MissingText,
    Oversize,
}

impl DecodeError {
    pub fn reason(&self) -> &'static str {
        match self {
            DecodeError::BadJson => crate::io::headers::REASON_BAD_JSON,
            DecodeError::InvalidUtf8 => crate::io::headers::REASON_INVALID_UTF8,
            DecodeError::MissingText => crate::io::headers::REASON_MISSING_TEXT,
            DecodeError::Oversize => crate::io::headers::REASON_OVERSIZE,
        }
    }
}

/// A decoded record: its id and its text fields with their weights.
#[derive(Debug, Default)]
pub struct Decoded {
    pub id: Option<String>,
    pub fields: Vec<(String, f64)>,
    /// Beside `fields`: each field's index in `input.fields` (what a rule's
    /// `field = ...` scope refers to). A text line is field 0.
    pub slots: Vec<usize>,
}

/// A codec built once from settings.
#[derive(Debug, Clone)]
pub struct Codec {
    kind: CodecKind,
    fields: Vec<FieldSetting>,
    id_field: String,
    max_bytes: usize,
}

impl Codec {
    pub fn new(kind: CodecKind, input: &InputSettings) -> Codec {
        Codec {
            kind,
            fields: input.fields.clone(),
            id_field: input.id_field.clone(),
            max_bytes: input.max_record_bytes,
        }
    }

    pub fn kind(&self) -> CodecKind {
        self.kind
    }

    /// Decode `bytes` into `out` (cleared first). A missing payload counts as missing text.
    pub fn decode(&self, bytes: Option<&[u8]>, out: &mut Decoded) -> Result<(), DecodeError> {
        out.id = None;
        out.fields.clear();
        out.slots.clear();
        let bytes = bytes.ok_or(DecodeError::MissingText)?;
        if bytes.len() > self.max_bytes {
            return Err(DecodeError::Oversize);
        }
        let text = std::str::from_utf8(bytes).map_err(|_| DecodeError::InvalidUtf8)?;
        match self.kind {
            CodecKind::Text => {
                let line = text.trim_end_matches(['\n', '\r']);
                if line.trim().is_empty() {
                    return Err(DecodeError::MissingText);
                }
                out.fields.push((line.to_string(), 1.0));
                out.slots.push(0);
                Ok(())
            }
            CodecKind::Json => {
                let v: Value = serde_json::from_str(text).map_err(|_| DecodeError::BadJson)?;
                if !v.is_object() {
                    return Err(DecodeError::BadJson);
                }
                for (i, f) in self.fields.iter().enumerate() {
                    if let Some(t) = json_path(&v, &f.name).and_then(field_text) {
                        if !t.trim().is_empty() {
                            out.fields.push((t.into_owned(), f.weight));
                            out.slots.push(i);
                        }
                    }
                }
                if out.fields.is_empty() {
                    return Err(DecodeError::MissingText);
                }
                out.id = json_path(&v, &self.id_field).and_then(field_text).map(|c| c.into_owned());
                Ok(())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::Settings;

    fn codec(kind: CodecKind) -> Codec {
        let mut s = Settings::defaults();
        s.input.max_record_bytes = 64;
        Codec::new(kind, &s.input)
    }

    #[test]
    fn json_fields_weights_and_id() {
        let mut d = Decoded::default();
        codec(CodecKind::Json).decode(Some(br#"{"id":7,"subject":"Tent pole","body":"snapped"}"#), &mut d).unwrap();
        assert_eq!(d.id.as_deref(), Some("7"));
        assert_eq!(d.fields, vec![("Tent pole".to_string(), 2.0), ("snapped".to_string(), 1.0)]);
        assert_eq!(d.slots, [0, 1], "subject and body are input.fields 0 and 1");
        codec(CodecKind::Json).decode(Some(br#"{"id":8,"body":"only a body","text":"and text"}"#), &mut d).unwrap();
        assert_eq!(d.slots, [1, 2], "a missing field leaves no slot");
    }

    #[test]
    fn each_bad_kind_has_its_reason() {
        let c = codec(CodecKind::Json);
        let mut d = Decoded::default();
        assert_eq!(c.decode(Some(b"{not json"), &mut d), Err(DecodeError::BadJson));
        assert_eq!(c.decode(Some(b"[1,2]"), &mut d), Err(DecodeError::BadJson));
        assert_eq!(c.decode(Some(b"{\"body\":\"\xff\"}"), &mut d), Err(DecodeError::InvalidUtf8));
        assert_eq!(c.decode(Some(br#"{"id":1,"other":"x"}"#), &mut d), Err(DecodeError::MissingText));
        assert_eq!(c.decode(None, &mut d), Err(DecodeError::MissingText));
        let big = format!("{{\"body\":\"{}\"}}", "a".repeat(80));
        assert_eq!(c.decode(Some(big.as_bytes()), &mut d), Err(DecodeError::Oversize));
        assert_eq!(DecodeError::Oversize.reason(), "oversize");
    }

    #[test]
    fn text_lines() {
        let c = codec(CodecKind::Text);
        let mut d = Decoded::default();
        c.decode(Some(b"disk full on node-3\n"), &mut d).unwrap();
        assert_eq!(d.fields, vec![("disk full on node-3".to_string(), 1.0)]);
        assert_eq!(d.slots, [0]);
        assert_eq!(c.decode(Some(b"  \n"), &mut d), Err(DecodeError::MissingText));
    }
}
