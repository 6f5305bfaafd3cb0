//! Invented test scenario: support tickets of "Fernbrook Outfitters", a fictional outdoor-gear shop, in four classes; malformed records of every kind; a model trained on them with the real binary.

use std::path::{Path, PathBuf};

pub const CLASSES: &[&str] = &["billing", "defects", "returns", "shipping"];

pub const PHRASES: &[(&str, &[&str])] = &[
    ("billing", &["charged twice for my order", "invoice total is wrong", "refund of the card charge", "payment declined at checkout", "gift card balance missing"]),
    ("defects", &["tent pole snapped on first use", "zipper broke on the sleeping bag", "camp stove leaks fuel", "backpack strap tore", "headlamp flickers and dies"]),
    ("returns", &["want to return the hiking boots", "need a return label", "exchange the jacket for a larger size", "send back the unused tent", "return window question"]),
    ("shipping", &["parcel has not arrived", "tracking shows no update", "delivered to the wrong address", "courier lost my package", "delivery is a week late"]),
];

/// A tiny deterministic generator (xorshift64*), so tests need no extra crates.
pub struct Rng(u64);
impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
    }
    pub fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        x.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    pub fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

pub fn phrase(class: usize, rng: &mut Rng) -> &'static str {
    let p = PHRASES[class].1;
    p[rng.below(p.len() as u64) as usize]
}

/// The malformed kinds and the dead-letter reason each must get.
pub const MALFORMED: &[(&str, &str)] =
    &[("bad_json", "bad json"), ("invalid_utf8", "invalid utf-8"), ("missing_text", "missing text field"), ("oversize", "oversize")];

/// Records bigger than this are oversize in the test settings.
pub const MAX_RECORD_BYTES: usize = 4096;

/// One generated input record.
#[derive(Debug, Clone)]
pub struct Input {
    pub key: Vec<u8>,
    pub payload: Vec<u8>,
    /// The malformed kind, if it is one.
    pub malformed: Option<&'static str>,
}

/// A well-formed ticket; `mixed` draws the body from another class (some go to review).
pub fn ticket(i: usize, key: &str, seq: usize, rng: &mut Rng) -> Input {
    let c = rng.below(CLASSES.len() as u64) as usize;
    let mixed = rng.below(10) == 0;
    let body_class = if mixed { (c + 1) % CLASSES.len() } else { c };
    // A mixed ticket names two problems under a vague subject: an uncertain decision.
    let (subject, body) = if mixed {
        ("help needed".to_string(), format!("{} and also {}", phrase(c, rng), phrase(body_class, rng)))
    } else {
        (phrase(c, rng).to_string(), format!("{} - order {}", phrase(c, rng), 1000 + rng.below(9000)))
    };
    let v = serde_json::json!({
        "id": format!("T-{i}"),
        "customer": key,
        "seq": seq,
        "subject": subject,
        "body": body,
    });
    Input { key: key.as_bytes().to_vec(), payload: serde_json::to_vec(&v).unwrap(), malformed: None }
}

/// A malformed record of `kind` (one of `MALFORMED`).
pub fn malformed(i: usize, key: &str, kind: &'static str) -> Input {
    let payload = match kind {
        "bad_json" => format!("{{\"id\": \"T-{i}\", \"subject\": \"tent pole").into_bytes(),
        "invalid_utf8" => {
            let mut b = format!("{{\"id\": \"T-{i}\", \"subject\": \"stove ").into_bytes();
            b.extend_from_slice(&[0xff, 0xfe, 0xc3]);
            b.extend_from_slice(b"\"}");
            b
        }
        "missing_text" => format!("{{\"id\": \"T-{i}\", \"priority\": \"high\"}}").into_bytes(),
        "oversize" => {
            format!("{{\"id\": \"T-{i}\", \"subject\": \"tent\", \"body\": \"{}\"}}", "long text ".repeat(MAX_RECORD_BYTES / 9)).into_bytes()
        }
        other => panic!("unknown malformed kind {other}"),
    };
    Input { key: key.as_bytes().to_vec(), payload, malformed: Some(kind) }
}

/// `n` records over `keys` customers, with every `malformed_every`-th one malformed (kinds in turn).
pub fn stream(n: usize, keys: usize, malformed_every: Option<usize>, seed: u64) -> Vec<Input> {
    let mut rng = Rng::new(seed);
    let mut seqs = vec![0usize; keys];
    (0..n)
        .map(|i| {
            let k = rng.below(keys as u64) as usize;
            let key = format!("cust-{k}");
            seqs[k] += 1;
            match malformed_every {
                Some(m) if i % m == m / 2 => malformed(i, &key, MALFORMED[(i / m) % MALFORMED.len()].0),
                _ => ticket(i, &key, seqs[k], &mut rng),
            }
        })
        .collect()
}

/// Train a model with the real binary on 800 labelled tickets; returns its path.
pub fn train_model(dir: &Path) -> PathBuf {
    let mut rng = Rng::new(99);
    let mut text = String::new();
    for i in 0..800 {
        let c = i % CLASSES.len();
        let v = serde_json::json!({"id": format!("L-{i}"), "subject": phrase(c, &mut rng), "body": phrase(c, &mut rng), "label": CLASSES[c]});
        text.push_str(&v.to_string());
        text.push('\n');
    }
    let train = dir.join("train.jsonl");
    std::fs::write(&train, text).unwrap();
    let model = dir.join("model.svm");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .args(["train", "--input"])
        .arg(&train)
        .arg("--out")
        .arg(&model)
        .output()
        .unwrap();
    assert!(out.status.success(), "train failed: {}", String::from_utf8_lossy(&out.stderr));
    model
}
