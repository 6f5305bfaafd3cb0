//! Record field access: dotted paths into JSON objects, and the text of a field as the analyzer sees it.

use std::borrow::Cow;

use serde_json::Value;

/// The value at a dotted path (`ticket.subject`), or `None`.
pub fn json_path<'a>(v: &'a Value, path: &str) -> Option<&'a Value> {
    if let Some(x) = v.get(path) {
        return Some(x);
    }
    let mut cur = v;
    for part in path.split('.') {
        cur = match cur {
            Value::Object(m) => m.get(part)?,
            Value::Array(a) => a.get(part.parse::<usize>().ok()?)?,
            _ => return None,
        };
    }
    Some(cur)
}

/// The text of a scalar field: strings as they are, numbers and booleans
/// printed; arrays of scalars joined by newlines; null and objects give `None`.
pub fn field_text(v: &Value) -> Option<Cow<'_, str>> {
    match v {
        Value::String(s) => Some(Cow::Borrowed(s)),
        Value::Number(n) => Some(Cow::Owned(n.to_string())),
        Value::Bool(b) => Some(Cow::Owned(b.to_string())),
        Value::Array(items) => {
            let parts: Vec<Cow<str>> = items.iter().filter_map(field_text).collect();
            if parts.is_empty() {
                None
            } else {
                Some(Cow::Owned(parts.join("\n")))
            }
        }
        Value::Null | Value::Object(_) => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn paths_and_text() {
        let v = json!({"id": 7, "ticket": {"subject": "Late parcel", "tags": ["a", "b"]}, "a.b": "flat"});
        assert_eq!(field_text(json_path(&v, "id").unwrap()).unwrap(), "7");
        assert_eq!(field_text(json_path(&v, "ticket.subject").unwrap()).unwrap(), "Late parcel");
        assert_eq!(field_text(json_path(&v, "ticket.tags").unwrap()).unwrap(), "a\nb");
        assert_eq!(field_text(json_path(&v, "ticket.tags.1").unwrap()).unwrap(), "b");
        assert_eq!(field_text(json_path(&v, "a.b").unwrap()).unwrap(), "flat");
        assert!(json_path(&v, "ticket.body").is_none());
        assert!(field_text(&json!(null)).is_none());
    }
}
