//! A label log in a file: complete label events one per line, read in order and followed as the file grows; offsets are indexes of non-blank lines, under the name `file:<file name>`.

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::time::Duration;

use crate::model::snapshot::LabelOffsets;
use crate::runtime::label_log::{LabelLog, LabelLogError, LabelMsg, LogEvent};

/// The label-log name of a file: `file:` and its file name, so a model folded
/// from a file by `train --labels` and a service following the same file (at
/// another path) agree on its offsets.
pub fn file_log_topic(path: &Path) -> String {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_else(|| path.display().to_string());
    format!("file:{name}")
}

/// How long one poll sleeps at the end of the file before looking again.
const FOLLOW_PAUSE: Duration = Duration::from_millis(20);

pub struct FileLabelLog {
    path: PathBuf,
    topic: String,
    reader: Option<BufReader<File>>,
    /// The index the next non-blank line will have.
    line: i64,
    /// Lines below this index are skipped (set by `seek`).
    from: i64,
    partial: Vec<u8>,
    ended: bool,
}

impl FileLabelLog {
    pub fn new(path: &Path) -> FileLabelLog {
        FileLabelLog {
            path: path.to_path_buf(),
            topic: file_log_topic(path),
            reader: None,
            line: 0,
            from: 0,
            partial: Vec::new(),
            ended: false,
        }
    }

    fn at_end(&mut self, timeout: Duration) -> LogEvent {
        if !self.ended {
            self.ended = true;
            return LogEvent::End { topic: self.topic.clone(), partition: 0 };
        }
        std::thread::sleep(timeout.min(FOLLOW_PAUSE));
        LogEvent::Idle
    }
}

impl LabelLog for FileLabelLog {
    fn poll(&mut self, timeout: Duration) -> Result<LogEvent, LabelLogError> {
        if self.reader.is_none() {
            match File::open(&self.path) {
                Ok(f) => self.reader = Some(BufReader::with_capacity(1 << 16, f)),
                // Not there yet: an empty log until it appears.
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(self.at_end(timeout)),
                Err(e) => {
                    return Err(LabelLogError::Read { what: format!("open {}", self.path.display()), reason: e.to_string() })
                }
            }
        }
        let reader = self.reader.as_mut().expect("opened above");
        loop {
            let n = reader.read_until(b'\n', &mut self.partial).map_err(|e| LabelLogError::Read {
                what: format!("read {}", self.path.display()),
                reason: e.to_string(),
            })?;
            if n == 0 || self.partial.last() != Some(&b'\n') {
                // At the end, possibly inside a line still being written: keep it for later.
                return Ok(self.at_end(timeout));
            }
            let mut payload = std::mem::take(&mut self.partial);
            while matches!(payload.last(), Some(b'\n' | b'\r')) {
                payload.pop();
            }
            if payload.iter().all(u8::is_ascii_whitespace) {
                continue;
            }
            let offset = self.line;
            self.line += 1;
            if offset < self.from {
                continue;
            }
            self.ended = false;
            return Ok(LogEvent::Message(LabelMsg {
                topic: self.topic.clone(),
                partition: 0,
                offset,
                key: None,
                payload,
                timestamp_ms: Some(crate::clock::unix_millis()),
            }));
        }
    }

    fn seek(&mut self, offsets: &LabelOffsets) -> Result<(), LabelLogError> {
        self.from = offsets.get(&self.topic).and_then(|p| p.get(&0)).copied().unwrap_or(0).max(0);
        self.reader = None;
        self.line = 0;
        self.partial.clear();
        self.ended = false;
        Ok(())
    }

    fn partitions(&self) -> Vec<(String, i32)> {
        vec![(self.topic.clone(), 0)]
    }

    fn describe(&self) -> String {
        format!("label file {}", self.path.display())
    }
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;
    use std::io::Write;

    use super::*;

    fn messages(log: &mut FileLabelLog) -> Vec<(i64, String)> {
        let mut out = Vec::new();
        loop {
            match log.poll(Duration::from_millis(1)).unwrap() {
                LogEvent::Message(m) => out.push((m.offset, String::from_utf8(m.payload).unwrap())),
                LogEvent::End { .. } | LogEvent::Idle => return out,
            }
        }
    }

    #[test]
    fn follows_growth_skips_blank_lines_waits_for_whole_lines_and_seeks() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("labels.jsonl");
        let mut log = FileLabelLog::new(&path);
        assert_eq!(log.poll(Duration::from_millis(1)).unwrap(), LogEvent::End { topic: "file:labels.jsonl".into(), partition: 0 });
        let mut f = std::fs::File::create(&path).unwrap();
        f.write_all(b"a\n\n  \nb\r\nc-partial").unwrap();
        f.flush().unwrap();
        assert_eq!(messages(&mut log), vec![(0, "a".to_string()), (1, "b".to_string())]);
        f.write_all(b"-done\nd\n").unwrap();
        f.flush().unwrap();
        assert_eq!(messages(&mut log), vec![(2, "c-partial-done".to_string()), (3, "d".to_string())]);
        log.seek(&BTreeMap::from([("file:labels.jsonl".to_string(), BTreeMap::from([(0, 2)]))])).unwrap();
        assert_eq!(messages(&mut log), vec![(2, "c-partial-done".to_string()), (3, "d".to_string())]);
        assert_eq!(file_log_topic(Path::new("/x/y/labels.jsonl")), "file:labels.jsonl");
    }
}
