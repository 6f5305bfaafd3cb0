//! Labelled and unlabelled input files for the offline commands: JSONL, CSV, TSV and plain text lines, row by row, with per-row errors.
//!
//! Documented behaviour on bad input (asserted in tests):
//! - invalid UTF-8, malformed JSON or CSV, a missing or empty label, no text
//!   field present, or only empty text: the row is reported with its line
//!   number as a [`RowError`] and the caller skips it (or stops, with `--strict`);
//! - a configured field that no CSV/TSV header has: a [`DatasetError::UnknownField`]
//!   before any row is read, listing the columns the file does have.

use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::Path;

use serde_json::Value;

use super::record::{field_text, json_path};
use crate::error::{DatasetError, RowError};
use crate::settings::FieldSetting;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Jsonl,
    Csv,
    Tsv,
    Text,
}

impl Format {
    /// Guess from the file extension; JSONL otherwise.
    pub fn from_path(p: &Path) -> Format {
        match p.extension().and_then(|e| e.to_str()).map(|e| e.to_ascii_lowercase()).as_deref() {
            Some("csv") => Format::Csv,
            Some("tsv") | Some("tab") => Format::Tsv,
            Some("txt") | Some("log") => Format::Text,
            _ => Format::Jsonl,
        }
    }

    pub fn parse(s: &str) -> Option<Format> {
        match s {
            "jsonl" | "json" => Some(Format::Jsonl),
            "csv" => Some(Format::Csv),
            "tsv" => Some(Format::Tsv),
            "text" | "txt" => Some(Format::Text),
            _ => None,
        }
    }
}

/// How to read rows.
#[derive(Debug, Clone)]
pub struct Spec {
    pub format: Format,
    pub fields: Vec<FieldSetting>,
    /// Required for training; `None` for classification.
    pub label_field: Option<String>,
    pub id_field: Option<String>,
    /// CSV/TSV: the first row names the columns. Without it, fields are column numbers from 0.
    pub header: bool,
}

/// One usable row.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    pub line: u64,
    pub id: Option<String>,
    pub label: Option<String>,
    /// (text, weight) per present text field, in settings order.
    pub fields: Vec<(String, f64)>,
    /// The row as JSON (for echoing the original record).
    pub raw: Option<Value>,
}

pub type Rows = Box<dyn Iterator<Item = Result<Row, RowError>>>;

/// Open a file (or `-` for stdin) as rows.
pub fn open(path: &Path, spec: &Spec) -> Result<Rows, DatasetError> {
    let name = path.display().to_string();
    let reader: Box<dyn Read> = if path.as_os_str() == "-" {
        Box::new(std::io::stdin())
    } else {
        Box::new(File::open(path).map_err(|e| DatasetError::Io { path: name.clone(), reason: e.to_string() })?)
    };
    from_reader(reader, &name, spec)
}

pub fn from_reader(reader: Box<dyn Read>, name: &str, spec: &Spec) -> Result<Rows, DatasetError> {
    match spec.format {
        Format::Jsonl => Ok(Box::new(JsonLines::new(reader, spec.clone()))),
        Format::Text => Ok(Box::new(TextLines { r: BufReader::new(reader), line: 0, buf: Vec::new() })),
        Format::Csv | Format::Tsv => delimited(reader, name, spec),
    }
}

struct TextLines {
    r: BufReader<Box<dyn Read>>,
    line: u64,
    buf: Vec<u8>,
}

impl Iterator for TextLines {
    type Item = Result<Row, RowError>;
    fn next(&mut self) -> Option<Self::Item> {
        loop {
            self.buf.clear();
            match self.r.read_until(b'\n', &mut self.buf) {
                Ok(0) => return None,
                Ok(_) => {}
                Err(e) => return Some(Err(RowError::Malformed { line: self.line + 1, format: "text", reason: e.to_string() })),
            }
            self.line += 1;
            let bytes = trim_newline(&self.buf);
            if bytes.is_empty() {
                continue;
            }
            let line = self.line;
            return Some(match std::str::from_utf8(bytes) {
                Err(_) => Err(RowError::InvalidUtf8 { line }),
                Ok(s) if s.trim().is_empty() => Err(RowError::EmptyText { line }),
                Ok(s) => Ok(Row {
                    line,
                    id: Some(line.to_string()),
                    label: None,
                    fields: vec![(s.to_string(), 1.0)],
                    raw: Some(Value::String(s.to_string())),
                }),
            });
        }
    }
}

struct JsonLines {
    r: BufReader<Box<dyn Read>>,
    spec: Spec,
    line: u64,
    buf: Vec<u8>,
}

impl JsonLines {
    fn new(r: Box<dyn Read>, spec: Spec) -> Self {
        JsonLines { r: BufReader::new(r), spec, line: 0, buf: Vec::new() }
    }
}

impl Iterator for JsonLines {
    type Item = Result<Row, RowError>;
    fn next(&mut self) -> Option<Self::Item> {
        loop {
            self.buf.clear();
            match self.r.read_until(b'\n', &mut self.buf) {
                Ok(0) => return None,
                Ok(_) => {}
                Err(e) => return Some(Err(RowError::Malformed { line: self.line + 1, format: "JSON", reason: e.to_string() })),
            }
            self.line += 1;
            let bytes = trim_newline(&self.buf);
            if bytes.iter().all(u8::is_ascii_whitespace) {
                continue;
            }
            return Some(json_row(bytes, self.line, &self.spec));
        }
    }
}

/// One JSON object as a row.
pub fn json_row(bytes: &[u8], line: u64, spec: &Spec) -> Result<Row, RowError> {
    let text = std::str::from_utf8(bytes).map_err(|_| RowError::InvalidUtf8 { line })?;
    let v: Value = serde_json::from_str(text)
        .map_err(|e| RowError::Malformed { line, format: "JSON", reason: e.to_string() })?;
    if !v.is_object() {
        return Err(RowError::Malformed { line, format: "JSON", reason: "not an object".into() });
    }
    let label = match &spec.label_field {
        None => None,
        Some(f) => {
            let l = json_path(&v, f).and_then(field_text).ok_or_else(|| RowError::MissingLabel { line, field: f.clone() })?;
            let l = l.trim().to_string();
            if l.is_empty() {
                return Err(RowError::EmptyLabel { line });
            }
            Some(l)
        }
    };
    let mut fields = Vec::new();
    for f in &spec.fields {
        if let Some(t) = json_path(&v, &f.name).and_then(field_text) {
            fields.push((t.into_owned(), f.weight));
        }
    }
    check_text(&fields, line, spec)?;
    let id = spec.id_field.as_ref().and_then(|f| json_path(&v, f)).and_then(field_text).map(|s| s.into_owned());
    Ok(Row { line, id, label, fields, raw: Some(v) })
}

fn check_text(fields: &[(String, f64)], line: u64, spec: &Spec) -> Result<(), RowError> {
    if fields.is_empty() {
        return Err(RowError::MissingText { line, fields: spec.fields.iter().map(|f| f.name.clone()).collect() });
    }
    if fields.iter().all(|(t, _)| t.trim().is_empty()) {
        return Err(RowError::EmptyText { line });
    }
    Ok(())
}

fn delimited(reader: Box<dyn Read>, name: &str, spec: &Spec) -> Result<Rows, DatasetError> {
    let tsv = spec.format == Format::Tsv;
    let mut b = csv::ReaderBuilder::new();
    b.has_headers(spec.header).flexible(true);
    if tsv {
        b.delimiter(b'\t').quoting(false);
    }
    let mut rdr = b.from_reader(reader);
    let fmt: &'static str = if tsv { "TSV" } else { "CSV" };
    let columns: Vec<String> = if spec.header {
        let h = rdr.byte_headers().map_err(|e| DatasetError::Header { path: name.into(), reason: e.to_string() })?;
        h.iter().map(|c| String::from_utf8_lossy(c).trim().to_string()).collect()
    } else {
        Vec::new()
    };
    let index_of = |field: &str| -> Option<usize> {
        if spec.header {
            columns.iter().position(|c| c == field)
        } else {
            field.parse::<usize>().ok()
        }
    };
    let unknown = |field: &str| DatasetError::UnknownField {
        path: name.into(),
        field: field.into(),
        available: if spec.header { columns.join(", ") } else { "column numbers from 0 (the file has no header)".into() },
    };
    let text_cols: Vec<(usize, f64)> = spec.fields.iter().filter_map(|f| index_of(&f.name).map(|i| (i, f.weight))).collect();
    if text_cols.is_empty() {
        let names: Vec<&str> = spec.fields.iter().map(|f| f.name.as_str()).collect();
        return Err(unknown(&names.join(" | ")));
    }
    let label_col = match &spec.label_field {
        None => None,
        Some(f) => Some(index_of(f).ok_or_else(|| unknown(f))?),
    };
    let id_col = spec.id_field.as_deref().and_then(index_of);
    let names = columns.clone();
    let field_names: Vec<String> = spec.fields.iter().map(|f| f.name.clone()).collect();
    let mut rec = csv::ByteRecord::new();
    let iter = std::iter::from_fn(move || {
        let line_before = rdr.position().line();
        match rdr.read_byte_record(&mut rec) {
            Ok(false) => None,
            Err(e) => {
                let line = e.position().map(|p| p.line()).unwrap_or(line_before);
                // Skip past the broken record so the stream goes on.
                Some(Err(RowError::Malformed { line, format: fmt, reason: e.to_string() }))
            }
            Ok(true) => {
                let line = rec.position().map(|p| p.line()).unwrap_or(line_before);
                Some(csv_row(&rec, line, fmt, &text_cols, label_col, id_col, &names, &field_names))
            }
        }
    });
    Ok(Box::new(iter))
}

#[allow(clippy::too_many_arguments)]
fn csv_row(
    rec: &csv::ByteRecord,
    line: u64,
    fmt: &'static str,
    text_cols: &[(usize, f64)],
    label_col: Option<usize>,
    id_col: Option<usize>,
    names: &[String],
    field_names: &[String],
) -> Result<Row, RowError> {
    let get = |i: usize| -> Result<Option<&str>, RowError> {
        match rec.get(i) {
            None => Ok(None),
            Some(b) => std::str::from_utf8(b).map(Some).map_err(|_| RowError::InvalidUtf8 { line }),
        }
    };
    if rec.len() == 1 && rec.get(0).is_some_and(|c| c.is_empty()) {
        return Err(RowError::Malformed { line, format: fmt, reason: "empty row".into() });
    }
    let label = match label_col {
        None => None,
        Some(i) => {
            let l = get(i)?.ok_or_else(|| RowError::MissingLabel { line, field: names.get(i).cloned().unwrap_or_else(|| i.to_string()) })?;
            let l = l.trim();
            if l.is_empty() {
                return Err(RowError::EmptyLabel { line });
            }
            Some(l.to_string())
        }
    };
    let mut fields = Vec::new();
    for &(i, w) in text_cols {
        if let Some(t) = get(i)? {
            fields.push((t.to_string(), w));
        }
    }
    if fields.is_empty() {
        return Err(RowError::MissingText { line, fields: field_names.to_vec() });
    }
    if fields.iter().all(|(t, _)| t.trim().is_empty()) {
        return Err(RowError::EmptyText { line });
    }
    let id = match id_col {
        Some(i) => get(i)?.map(str::to_string),
        None => None,
    };
    let mut obj = serde_json::Map::new();
    for (i, cell) in rec.iter().enumerate() {
        let key = names.get(i).cloned().unwrap_or_else(|| i.to_string());
        obj.insert(key, Value::String(String::from_utf8_lossy(cell).into_owned()));
    }
    Ok(Row { line, id, label, fields, raw: Some(Value::Object(obj)) })
}

fn trim_newline(b: &[u8]) -> &[u8] {
    let b = b.strip_suffix(b"\n").unwrap_or(b);
    b.strip_suffix(b"\r").unwrap_or(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(format: Format, fields: &[(&str, f64)], label: Option<&str>, header: bool) -> Spec {
        Spec {
            format,
            fields: fields.iter().map(|(n, w)| FieldSetting { name: n.to_string(), weight: *w }).collect(),
            label_field: label.map(str::to_string),
            id_field: Some("id".into()),
            header,
        }
    }

    fn rows(data: &[u8], s: &Spec) -> Vec<Result<Row, RowError>> {
        from_reader(Box::new(std::io::Cursor::new(data.to_vec())), "mem", s).unwrap().collect()
    }

    #[test]
    fn jsonl_bad_rows_are_reported_with_line_numbers() {
        let data = b"{\"id\":1,\"subject\":\"Late parcel\",\"body\":\"where is it\",\"label\":\"shipping\"}\n\
{not json\n\
{\"id\":3,\"body\":\"no label here\"}\n\
{\"id\":4,\"body\":\"x\",\"label\":\"  \"}\n\
{\"id\":5,\"other\":\"no text\",\"label\":\"a\"}\n\
{\"id\":6,\"body\":\"   \",\"label\":\"a\"}\n\
{\"id\":7,\"body\":\"caf\xff\",\"label\":\"a\"}\n\
\n\
[1,2]\n";
        let s = spec(Format::Jsonl, &[("subject", 2.0), ("body", 1.0)], Some("label"), false);
        let r = rows(data, &s);
        assert_eq!(r.len(), 8);
        let ok = r[0].as_ref().unwrap();
        assert_eq!(ok.fields, vec![("Late parcel".into(), 2.0), ("where is it".into(), 1.0)]);
        assert_eq!(ok.label.as_deref(), Some("shipping"));
        assert_eq!(ok.id.as_deref(), Some("1"));
        assert!(matches!(r[1], Err(RowError::Malformed { line: 2, .. })));
        assert!(matches!(r[2], Err(RowError::MissingLabel { line: 3, .. })));
        assert!(matches!(r[3], Err(RowError::EmptyLabel { line: 4 })));
        assert!(matches!(r[4], Err(RowError::MissingText { line: 5, .. })));
        assert!(matches!(r[5], Err(RowError::EmptyText { line: 6 })));
        assert!(matches!(r[6], Err(RowError::InvalidUtf8 { line: 7 })));
        assert!(matches!(r[7], Err(RowError::Malformed { line: 9, .. })), "{:?}", r[7]);
    }

    #[test]
    fn csv_with_header_and_quoted_multiline_text() {
        let data = b"text,category\n\"first line\nsecond line\",card_arrival\nplain,top_up\n,empty_text\nbad\xfe,x\n";
        let s = spec(Format::Csv, &[("text", 1.0)], Some("category"), true);
        let r = rows(data, &s);
        assert_eq!(r[0].as_ref().unwrap().fields[0].0, "first line\nsecond line");
        assert_eq!(r[0].as_ref().unwrap().label.as_deref(), Some("card_arrival"));
        assert_eq!(r[1].as_ref().unwrap().line, 4);
        assert!(matches!(r[2], Err(RowError::EmptyText { line: 5 })));
        assert!(matches!(r[3], Err(RowError::InvalidUtf8 { line: 6 })));
    }

    #[test]
    fn csv_unknown_field_is_an_error_listing_columns() {
        let data = b"text,category\nhello,a\n";
        let s = spec(Format::Csv, &[("body", 1.0)], Some("category"), true);
        let e = from_reader(Box::new(std::io::Cursor::new(data.to_vec())), "t.csv", &s).err().unwrap();
        let m = e.to_string();
        assert!(m.contains("unknown field") && m.contains("body") && m.contains("text, category"), "{m}");
        let s = spec(Format::Csv, &[("text", 1.0)], Some("label"), true);
        let e = from_reader(Box::new(std::io::Cursor::new(data.to_vec())), "t.csv", &s).err().unwrap();
        assert!(e.to_string().contains("\"label\""));
    }

    #[test]
    fn tsv_without_header_uses_column_numbers_and_keeps_quotes() {
        let data = b"ham\tOk \"lar\" joking\nspam\tFree entry, call 0800\nham\n";
        let s = spec(Format::Tsv, &[("1", 1.0)], Some("0"), false);
        let r = rows(data, &s);
        assert_eq!(r[0].as_ref().unwrap().fields[0].0, "Ok \"lar\" joking");
        assert_eq!(r[1].as_ref().unwrap().label.as_deref(), Some("spam"));
        assert!(matches!(r[2], Err(RowError::MissingText { line: 3, .. })));
    }

    #[test]
    fn text_lines() {
        let s = spec(Format::Text, &[], None, false);
        let r = rows(b"first line\n\nthird \xff\n   \n", &s);
        assert_eq!(r[0].as_ref().unwrap().fields, vec![("first line".into(), 1.0)]);
        assert!(matches!(r[1], Err(RowError::InvalidUtf8 { line: 3 })));
        assert!(matches!(r[2], Err(RowError::EmptyText { line: 4 })));
    }
}
