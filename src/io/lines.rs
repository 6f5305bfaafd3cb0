//! Line edges without a broker: stdin or a file as a source (one record a line), stdout or a file as a sink (one JSON object a line).

use std::io::Write;
use std::path::Path;
use std::sync::Mutex;

use serde_json::json;
use tokio::io::{AsyncBufRead, AsyncBufReadExt, BufReader};

use crate::io::headers as h;
use crate::io::message::{OutKind, Outgoing};

/// A line source: stdin or a file.
pub struct LineSource {
    pub name: String,
    reader: Box<dyn AsyncBufRead + Unpin + Send>,
}

impl LineSource {
    pub fn stdin() -> LineSource {
        LineSource { name: "stdin".into(), reader: Box::new(BufReader::with_capacity(1 << 16, tokio::io::stdin())) }
    }

    /// Lines from any reader (the demo feeds the pipeline through an in-process pipe).
    pub fn from_reader(name: &str, reader: Box<dyn AsyncBufRead + Unpin + Send>) -> LineSource {
        LineSource { name: name.to_string(), reader }
    }

    pub async fn file(path: &Path) -> std::io::Result<LineSource> {
        let f = tokio::fs::File::open(path).await?;
        Ok(LineSource { name: path.display().to_string(), reader: Box::new(BufReader::with_capacity(1 << 16, f)) })
    }

    /// The next line without its line ending, into `buf`; false at end of input.
    pub async fn next_line(&mut self, buf: &mut Vec<u8>) -> std::io::Result<bool> {
        buf.clear();
        let n = self.reader.read_until(b'\n', buf).await?;
        if n == 0 {
            return Ok(false);
        }
        while matches!(buf.last(), Some(b'\n' | b'\r')) {
            buf.pop();
        }
        Ok(true)
    }
}

/// A line sink: stdout or a file. Each output becomes one JSON object on its own line.
pub struct LineSink {
    out: Mutex<std::io::BufWriter<Box<dyn Write + Send>>>,
    /// Flush after every line (when a Kafka source commits offsets on the ack).
    flush_each: bool,
}

impl LineSink {
    pub fn stdout(flush_each: bool) -> LineSink {
        LineSink {
            out: Mutex::new(std::io::BufWriter::with_capacity(1 << 16, Box::new(std::io::stdout()))),
            flush_each,
        }
    }

    /// Lines to any writer (the demo reads its decisions back as they are written).
    pub fn writer(w: Box<dyn Write + Send>, flush_each: bool) -> LineSink {
        LineSink { out: Mutex::new(std::io::BufWriter::with_capacity(1 << 16, w)), flush_each }
    }

    pub fn file(path: &Path, flush_each: bool) -> std::io::Result<LineSink> {
        let f = std::fs::OpenOptions::new().create(true).append(true).open(path)?;
        Ok(LineSink { out: Mutex::new(std::io::BufWriter::with_capacity(1 << 16, Box::new(f))), flush_each })
    }

    /// Write one output; once this returns the output counts as acknowledged.
    pub fn write(&self, o: &Outgoing) -> std::io::Result<()> {
        let line = render_line(o);
        let mut out = self.out.lock().expect("line sink lock");
        out.write_all(&line)?;
        out.write_all(b"\n")?;
        if self.flush_each {
            out.flush()?;
        }
        Ok(())
    }

    pub fn flush(&self) -> std::io::Result<()> {
        self.out.lock().expect("line sink lock").flush()
    }
}

/// Decisions and reviews: `{"destination": .., "kind": .., <the decision>}`.
/// Dead letters: destination, reason, source position and the original line (lossy
/// UTF-8 in `original`; the exact bytes in hex in `original_hex` when not UTF-8).
pub fn render_line(o: &Outgoing) -> Vec<u8> {
    match &o.kind {
        OutKind::Decision { .. } | OutKind::Review { .. } => {
            let kind = if matches!(o.kind, OutKind::Review { .. }) { "review" } else { "decision" };
            let mut line = Vec::with_capacity(o.payload.len() + o.topic.len() + 40);
            line.extend_from_slice(b"{\"destination\":");
            serde_json::to_writer(&mut line, &o.topic).expect("string serializes");
            line.extend_from_slice(b",\"kind\":\"");
            line.extend_from_slice(kind.as_bytes());
            line.extend_from_slice(b"\",");
            line.extend_from_slice(&o.payload[1..]);
            line
        }
        OutKind::Label => {
            let mut line = Vec::with_capacity(o.payload.len() + o.topic.len() + 40);
            line.extend_from_slice(b"{\"destination\":");
            serde_json::to_writer(&mut line, &o.topic).expect("string serializes");
            line.extend_from_slice(b",\"kind\":\"label\",\"event\":");
            line.extend_from_slice(&o.payload);
            line.push(b'}');
            line
        }
        OutKind::DeadLetter { reason } => {
            let head = |n: &str| o.header(n).map(|v| String::from_utf8_lossy(v).into_owned());
            let mut v = json!({
                "destination": o.topic,
                "kind": "dead_letter",
                "reason": reason,
                "source": {
                    "topic": head(h::SOURCE_TOPIC),
                    "partition": head(h::SOURCE_PARTITION).and_then(|p| p.parse::<i64>().ok()),
                    "offset": head(h::SOURCE_OFFSET).and_then(|p| p.parse::<i64>().ok()),
                },
                "original": String::from_utf8_lossy(&o.payload),
            });
            if std::str::from_utf8(&o.payload).is_err() {
                let hex: String = o.payload.iter().map(|b| format!("{b:02x}")).collect();
                v["original_hex"] = json!(hex);
            }
            if let Some(e) = head(h::ERROR) {
                v["error"] = json!(e);
            }
            serde_json::to_vec(&v).expect("value serializes")
        }
    }
}
