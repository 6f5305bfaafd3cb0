//! The model file: magic bytes, format version, a JSON header, the counts, and a blake3 checksum; written atomically, refused whole when damaged.
//!
//! Layout (little-endian):
//! ```text
//! b"SVLNMODL"  u32 format_version  u32 header_len  header (JSON, header_len bytes)
//! vocabulary   interned: u32 term count, then per term u32 byte length + UTF-8 bytes
//!              hashed:   nothing (the bucket count is in the header)
//! doc_counts   K × f64
//! counts       rows × K × f64, row-major
//! checksum     32 bytes, blake3 of everything before it
//! ```
//! Writing goes to a temporary file in the same folder, which is fsynced and
//! renamed over the target, and the folder is fsynced; a reader sees the old
//! file or the new one, never half of one.

use std::collections::BTreeMap;
use std::io::Write;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::SnapshotError;
use crate::features::Vocabulary;
use crate::settings::{AnalyzerSettings, VocabularyKind};
use crate::text::analyzer::{differences, fingerprint};

use super::nb::Model;
use super::params::NbParams;

pub const MAGIC: &[u8; 8] = b"SVLNMODL";
pub const FORMAT_VERSION: u32 = 1;
const CHECKSUM_LEN: usize = 32;
/// Headers larger than this are taken as corruption, not read.
const MAX_HEADER: usize = 64 << 20;

/// Label-log positions a snapshot includes: topic → partition → next offset to read.
pub type LabelOffsets = BTreeMap<String, BTreeMap<i32, i64>>;

/// What a snapshot records besides the counts.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct SnapshotMeta {
    pub label_offsets: LabelOffsets,
    pub created_at: String,
    pub model_version: String,
    pub labels_learned: u64,
    /// Checksum of the model file this snapshot was folded on top of; empty
    /// for a file written by `train` (it is its own base).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub base: String,
    /// `labels_learned` of that base file.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub base_labels: u64,
}

fn is_zero(n: &u64) -> bool {
    *n == 0
}

impl SnapshotMeta {
    /// A fresh meta for a model just trained offline: empty offsets, now.
    pub fn fresh(model: &Model, version: Option<String>) -> SnapshotMeta {
        let created_at = crate::clock::rfc3339_now();
        let model_version =
            version.unwrap_or_else(|| format!("{}-{}", &created_at[..10], &model.fingerprint()[..8]));
        SnapshotMeta { label_offsets: BTreeMap::new(), created_at, model_version, ..SnapshotMeta::default() }
    }

    /// The base file's checksum and its label count, given this file's own checksum.
    pub fn lineage<'a>(&'a self, own_checksum: &'a str) -> (&'a str, u64) {
        if self.base.is_empty() {
            (own_checksum, self.labels_learned)
        } else {
            (&self.base, self.base_labels)
        }
    }
}

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct Header {
    classes: Vec<String>,
    analyzer_fingerprint: String,
    analyzer: AnalyzerSettings,
    params: NbParams,
    vocabulary: VocabularyKind,
    max_vocabulary: usize,
    hash_buckets: usize,
    vocabulary_size: u64,
    rows: u64,
    documents: f64,
    count_fingerprint: String,
    meta: SnapshotMeta,
}

/// A loaded snapshot: the model, its meta, and the file checksum (hex), which
/// identifies the exact base a decision was scored against.
#[derive(Debug, Clone)]
pub struct Loaded {
    pub model: Model,
    pub meta: SnapshotMeta,
    pub checksum: String,
}

/// The version decisions carry: the first 12 hex digits of the base model
/// file's checksum, `+`, and the number of labels learned on top of it.
pub fn served_version(base: &str, applied: u64) -> String {
    format!("{}+{applied}", &base[..base.len().min(12)])
}

impl Loaded {
    /// The version decisions scored with this file carry.
    pub fn served_version(&self) -> String {
        let (base, base_labels) = self.meta.lineage(&self.checksum);
        served_version(base, self.meta.labels_learned.saturating_sub(base_labels))
    }
}

/// Encode a model into the file format.
pub fn encode(model: &Model, meta: &SnapshotMeta) -> Vec<u8> {
    let (max_vocabulary, hash_buckets) = match &model.vocab {
        Vocabulary::Interned(v) => (v.max(), 0),
        Vocabulary::Hashed { buckets } => (0, *buckets as usize),
    };
    let header = Header {
        classes: model.classes.clone(),
        analyzer_fingerprint: fingerprint(&model.analyzer),
        analyzer: model.analyzer.clone(),
        params: model.params.clone(),
        vocabulary: model.vocab.kind(),
        max_vocabulary,
        hash_buckets,
        vocabulary_size: model.vocabulary_size() as u64,
        rows: model.rows() as u64,
        documents: model.documents(),
        count_fingerprint: model.fingerprint(),
        meta: meta.clone(),
    };
    let head = serde_json::to_vec(&header).expect("header serializes");
    let body_len = model.rows() * model.k * 8 + model.k * 8 + model.vocab.terms().map(|t| t.len() + 4).sum::<usize>();
    let mut out = Vec::with_capacity(16 + head.len() + body_len + 4 + CHECKSUM_LEN);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    out.extend_from_slice(&(head.len() as u32).to_le_bytes());
    out.extend_from_slice(&head);
    if let Vocabulary::Interned(v) = &model.vocab {
        out.extend_from_slice(&(v.len() as u32).to_le_bytes());
        for t in v.terms() {
            out.extend_from_slice(&(t.len() as u32).to_le_bytes());
            out.extend_from_slice(t.as_bytes());
        }
    }
    for d in &model.doc_counts {
        out.extend_from_slice(&d.to_le_bytes());
    }
    for id in 0..model.rows() as u32 {
        for v in model.row(id) {
            out.extend_from_slice(&v.to_le_bytes());
        }
    }
    let sum = blake3::hash(&out);
    out.extend_from_slice(sum.as_bytes());
    out
}

/// Write atomically: temporary file, fsync, rename, fsync of the folder.
/// Returns the checksum (hex).
pub fn write(path: &Path, model: &Model, meta: &SnapshotMeta) -> Result<String, SnapshotError> {
    let bytes = encode(model, meta);
    let io = |e: std::io::Error| SnapshotError::Io { path: path.display().to_string(), reason: e.to_string() };
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let name = path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_else(|| "model".into());
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    {
        let mut f = std::fs::File::create(&tmp).map_err(io)?;
        f.write_all(&bytes).map_err(io)?;
        f.sync_all().map_err(io)?;
    }
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        io(e)
    })?;
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    Ok(hex(&bytes[bytes.len() - CHECKSUM_LEN..]))
}

/// Read and check a model file. With `expected` analyzer settings, a model
/// built with other settings is refused and the message names them.
pub fn read(path: &Path, expected: Option<&AnalyzerSettings>) -> Result<Loaded, SnapshotError> {
    let bytes = std::fs::read(path)
        .map_err(|e| SnapshotError::Io { path: path.display().to_string(), reason: e.to_string() })?;
    decode(&bytes, &path.display().to_string(), expected)
}

/// Decode bytes of the file format; `name` is used in messages.
pub fn decode(bytes: &[u8], name: &str, expected: Option<&AnalyzerSettings>) -> Result<Loaded, SnapshotError> {
    let p = || name.to_string();
    let trunc = |what: &str| SnapshotError::Truncated { path: p(), what: what.to_string() };
    let corrupt = |what: String| SnapshotError::Corrupt { path: p(), what };
    if bytes.len() < MAGIC.len() {
        return if MAGIC.starts_with(bytes) && !bytes.is_empty() {
            Err(trunc("the file ends inside the magic bytes"))
        } else {
            Err(SnapshotError::NotASnapshot { path: p() })
        };
    }
    if &bytes[..8] != MAGIC {
        return Err(SnapshotError::NotASnapshot { path: p() });
    }
    let mut r = Reader { b: bytes, at: 8 };
    let version = r.u32().ok_or_else(|| trunc("the file ends inside the format version"))?;
    if version != FORMAT_VERSION {
        return Err(SnapshotError::WrongVersion { path: p(), found: version, expected: FORMAT_VERSION });
    }
    let hlen = r.u32().ok_or_else(|| trunc("the file ends inside the header length"))? as usize;
    if hlen > MAX_HEADER {
        return Err(corrupt(format!("header length {hlen} is implausible")));
    }
    let head = r.take(hlen).ok_or_else(|| trunc("the file ends inside the header"))?;
    let header: Header = serde_json::from_slice(head).map_err(|e| corrupt(format!("header: {e}")))?;
    let k = header.classes.len();
    let rows = header.rows as usize;
    // Size check before the checksum, so a short file says "truncated".
    let fixed = (k + rows.checked_mul(k).ok_or_else(|| corrupt("row count overflows".into()))?) * 8;
    let vocab_min = if header.vocabulary == VocabularyKind::Interned { 4 + rows * 4 } else { 0 };
    if bytes.len() < r.at + vocab_min + fixed + CHECKSUM_LEN {
        return Err(trunc(&format!(
            "{} bytes, expected at least {}",
            bytes.len(),
            r.at + vocab_min + fixed + CHECKSUM_LEN
        )));
    }
    let body_end = bytes.len() - CHECKSUM_LEN;
    let stored = &bytes[body_end..];
    let computed = blake3::hash(&bytes[..body_end]);
    if stored != computed.as_bytes() {
        return Err(SnapshotError::Checksum { path: p(), stored: hex(stored), computed: computed.to_hex().to_string() });
    }
    let current_fp = expected.map(fingerprint);
    if let (Some(exp), Some(cur)) = (expected, &current_fp) {
        if &header.analyzer_fingerprint != cur || &header.analyzer != exp {
            let d = differences(&header.analyzer, exp);
            return Err(SnapshotError::AnalyzerMismatch {
                path: p(),
                model: header.analyzer_fingerprint.clone(),
                current: cur.clone(),
                differences: if d.is_empty() { "analyzer revision".into() } else { d.join(", ") },
            });
        }
    }
    if fingerprint(&header.analyzer) != header.analyzer_fingerprint {
        return Err(corrupt("analyzer fingerprint does not match its settings".into()));
    }
    let vocab = match header.vocabulary {
        VocabularyKind::Interned => {
            let n = r.u32().ok_or_else(|| trunc("vocabulary"))? as usize;
            if n != rows {
                return Err(corrupt(format!("vocabulary has {n} terms for {rows} rows")));
            }
            let mut terms = Vec::with_capacity(n);
            for _ in 0..n {
                let len = r.u32().ok_or_else(|| trunc("vocabulary"))? as usize;
                let t = r.take(len).ok_or_else(|| trunc("vocabulary"))?;
                let t = std::str::from_utf8(t).map_err(|_| corrupt("a term is not UTF-8".into()))?;
                terms.push(t);
            }
            Vocabulary::from_term_iter(terms, header.max_vocabulary).map_err(corrupt)?
        }
        VocabularyKind::Hashed => {
            if header.hash_buckets != rows || rows == 0 {
                return Err(corrupt(format!("{} buckets for {rows} rows", header.hash_buckets)));
            }
            Vocabulary::Hashed { buckets: rows as u32 }
        }
    };
    let doc_counts = r.f64s(k).ok_or_else(|| trunc("document counts"))?;
    // The counts are read straight from the bytes into the model's rows, with no flat copy.
    let counts = r.take(rows * k * 8).ok_or_else(|| trunc("counts"))?;
    let counts = counts.chunks_exact(8).map(|c| f64::from_le_bytes(c.try_into().unwrap()));
    if r.at != body_end {
        return Err(corrupt(format!("{} unexpected bytes after the counts", body_end - r.at)));
    }
    if doc_counts.iter().copied().chain(counts.clone()).any(|v| !v.is_finite() || v < 0.0) {
        return Err(corrupt("a count is negative or not finite".into()));
    }
    let model = Model::from_counts(header.params, header.analyzer, header.classes, vocab, doc_counts, counts)
        .map_err(|e| corrupt(e.to_string()))?;
    if model.fingerprint() != header.count_fingerprint {
        return Err(corrupt("count fingerprint does not match the counts".into()));
    }
    Ok(Loaded { model, meta: header.meta, checksum: hex(stored) })
}

struct Reader<'a> {
    b: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> Option<&'a [u8]> {
        let end = self.at.checked_add(n)?;
        if end > self.b.len() {
            return None;
        }
        let s = &self.b[self.at..end];
        self.at = end;
        Some(s)
    }
    fn u32(&mut self) -> Option<u32> {
        self.take(4).map(|s| u32::from_le_bytes(s.try_into().unwrap()))
    }
    fn f64s(&mut self, n: usize) -> Option<Vec<f64>> {
        let s = self.take(n.checked_mul(8)?)?;
        Some(s.chunks_exact(8).map(|c| f64::from_le_bytes(c.try_into().unwrap())).collect())
    }
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::Settings;
    use crate::text::TermBag;

    fn model(kind: VocabularyKind) -> Model {
        let s = Settings::defaults();
        let mut m = Model::new(
            NbParams::multinomial(0.5),
            s.analyzer,
            vec!["billing".into(), "returns".into(), "shipping".into()],
            Vocabulary::new(kind, 1000, 64),
        )
        .unwrap();
        m.learn(&TermBag::from_pairs([("refund", 2.0), ("card", 1.0)]), "billing", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("label", 1.0), ("refund", 1.0)]), "returns", 1.0).unwrap();
        m.learn(&TermBag::from_pairs([("parcel", 1.0), ("<num>", 1.0)]), "shipping", 0.5).unwrap();
        m
    }

    fn meta() -> SnapshotMeta {
        let mut offsets = BTreeMap::new();
        offsets.insert("labels.learned".to_string(), BTreeMap::from([(0, 17i64), (1, 4)]));
        SnapshotMeta {
            label_offsets: offsets,
            created_at: "2026-01-05T10:00:00Z".into(),
            model_version: "test-1".into(),
            labels_learned: 21,
            base: "ab".repeat(32),
            base_labels: 5,
        }
    }

    #[test]
    fn round_trip_is_bit_identical() {
        for kind in [VocabularyKind::Interned, VocabularyKind::Hashed] {
            let m = model(kind);
            let bytes = encode(&m, &meta());
            let loaded = decode(&bytes, "mem", Some(m.analyzer_settings())).unwrap();
            assert_eq!(loaded.meta, meta());
            assert_eq!(loaded.model.fingerprint(), m.fingerprint());
            assert_eq!(encode(&loaded.model, &loaded.meta), bytes, "{kind:?}");
            assert_eq!(loaded.model.cells.logw_flat(), m.cells.logw_flat());
        }
    }

    /// Files in `tests/fixtures/` were written by the code before the shared row and
    /// vocabulary layout (commit 2aeec90), from the records `fixture_model` learns.
    #[test]
    fn format_v1_files_written_before_the_shared_layout_load_unchanged() {
        let files: [(&[u8], VocabularyKind); 2] = [
            (include_bytes!("../../tests/fixtures/format-v1-interned.svm"), VocabularyKind::Interned),
            (include_bytes!("../../tests/fixtures/format-v1-hashed.svm"), VocabularyKind::Hashed),
        ];
        for (bytes, kind) in files {
            // Loading checks the stored count fingerprint, computed by the old code.
            let loaded = decode(bytes, "fixture", None).unwrap();
            assert_eq!(loaded.meta.model_version, "fixture-v1");
            assert_eq!(encode(&loaded.model, &loaded.meta), bytes, "{kind:?}: re-encoding gives the same bytes");
            let rebuilt = fixture_model(kind);
            assert_eq!(rebuilt.fingerprint(), loaded.model.fingerprint(), "{kind:?}");
            assert_eq!(rebuilt.term_counts(), loaded.model.term_counts());
            assert_eq!(rebuilt.cells.logw_flat(), loaded.model.cells.logw_flat());
            assert_eq!(encode(&rebuilt, &loaded.meta), bytes, "{kind:?}: the same model encodes to the old file");
        }
    }

    fn fixture_model(kind: VocabularyKind) -> Model {
        let mut m = Model::new(
            NbParams::multinomial(0.5),
            Settings::defaults().analyzer,
            vec!["billing".into(), "returns".into(), "shipping".into()],
            Vocabulary::new(kind, 100_000, 512),
        )
        .unwrap();
        let mut rng = crate::eval::folds::SplitMix64::new(2026);
        for r in 0..400 {
            let mut bag = TermBag::new();
            for _ in 0..8 {
                bag.push(&format!("t{}", rng.below(1500)), [1.0, 2.0, 0.5][rng.below(3) as usize]);
            }
            m.learn(&bag, ["billing", "returns", "shipping"][r % 3], 1.0).unwrap();
        }
        m
    }

    #[test]
    fn write_is_atomic_and_reads_back() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("m.svm");
        let m = model(VocabularyKind::Interned);
        let sum = write(&path, &m, &meta()).unwrap();
        let l = read(&path, None).unwrap();
        assert_eq!(l.checksum, sum);
        let leftovers: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(leftovers.len(), 1, "no temporary file left behind");
    }

    #[test]
    fn every_truncation_is_an_error_not_a_panic() {
        let bytes = encode(&model(VocabularyKind::Interned), &meta());
        for cut in 0..bytes.len() {
            let e = decode(&bytes[..cut], "m.svm", None).unwrap_err();
            let msg = e.to_string();
            assert!(
                matches!(e, SnapshotError::Truncated { .. } | SnapshotError::NotASnapshot { .. } | SnapshotError::Checksum { .. } | SnapshotError::Corrupt { .. }),
                "cut {cut}: {msg}"
            );
        }
        let e = decode(&bytes[..bytes.len() - 40], "m.svm", None).unwrap_err();
        assert!(matches!(e, SnapshotError::Truncated { .. }), "{e}");
    }

    #[test]
    fn every_flipped_byte_is_refused() {
        let bytes = encode(&model(VocabularyKind::Interned), &meta());
        for i in (0..bytes.len()).step_by(7) {
            let mut b = bytes.clone();
            b[i] ^= 0x5a;
            assert!(decode(&b, "m.svm", None).is_err(), "flip at {i} accepted");
        }
        let mut b = bytes.clone();
        let n = b.len();
        b[n - 50] ^= 1;
        assert!(matches!(decode(&b, "m.svm", None).unwrap_err(), SnapshotError::Checksum { .. }));
    }

    #[test]
    fn foreign_and_wrong_version_files() {
        let e = decode(b"PK\x03\x04 a zip file, not ours", "x.zip", None).unwrap_err();
        assert!(matches!(e, SnapshotError::NotASnapshot { .. }), "{e}");
        assert!(e.to_string().contains("not a sieveline model file"));
        let mut bytes = encode(&model(VocabularyKind::Interned), &meta());
        bytes[8..12].copy_from_slice(&2u32.to_le_bytes());
        let e = decode(&bytes, "m.svm", None).unwrap_err();
        assert!(matches!(e, SnapshotError::WrongVersion { found: 2, expected: 1, .. }), "{e}");
    }

    #[test]
    fn other_analyzer_settings_are_refused_by_name() {
        let m = model(VocabularyKind::Interned);
        let bytes = encode(&m, &meta());
        let mut current = m.analyzer_settings().clone();
        current.bigrams = true;
        current.collapse.emails = false;
        let e = decode(&bytes, "m.svm", Some(&current)).unwrap_err();
        let msg = e.to_string();
        assert!(matches!(e, SnapshotError::AnalyzerMismatch { .. }));
        assert!(msg.contains("analyzer.bigrams") && msg.contains("analyzer.collapse.emails"), "{msg}");
    }
}
