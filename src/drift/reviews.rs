//! `ReviewRing`: the last few records sent to review, with their text cut to a few characters, for the status page. Bounded; buffers are reused once full.

use std::collections::VecDeque;

use serde::Serialize;

/// One reviewed record as the status page shows it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReviewedRecord {
    /// Counts reviewed records since start (1 for the first).
    pub seq: u64,
    pub id: String,
    pub class: String,
    pub confidence: f64,
    /// Why it went to review (the review reason's label).
    pub reason: String,
    /// The record's text fields, whitespace runs as one space, cut to the limit (with "…" when cut).
    pub text: String,
}

/// The bounded ring.
#[derive(Debug, Clone)]
pub struct ReviewRing {
    capacity: usize,
    max_chars: usize,
    items: VecDeque<ReviewedRecord>,
    seq: u64,
}

impl ReviewRing {
    pub fn new(capacity: usize, max_chars: usize) -> ReviewRing {
        ReviewRing { capacity, max_chars, items: VecDeque::with_capacity(capacity), seq: 0 }
    }

    /// Remember one reviewed record; `fields` are its text fields in order.
    pub fn push<'a>(
        &mut self,
        id: Option<&str>,
        class: &str,
        confidence: f64,
        reason: &str,
        fields: impl IntoIterator<Item = &'a str>,
    ) {
        self.seq += 1;
        if self.capacity == 0 {
            return;
        }
        let mut r = if self.items.len() >= self.capacity {
            self.items.pop_front().expect("full ring has a front")
        } else {
            ReviewedRecord {
                seq: 0,
                id: String::new(),
                class: String::new(),
                confidence: 0.0,
                reason: String::new(),
                text: String::new(),
            }
        };
        r.seq = self.seq;
        r.id.clear();
        r.id.push_str(id.unwrap_or(""));
        r.class.clear();
        r.class.push_str(class);
        r.confidence = confidence;
        r.reason.clear();
        r.reason.push_str(reason);
        r.text.clear();
        truncate_into(&mut r.text, fields, self.max_chars);
        self.items.push_back(r);
    }

    /// Newest first.
    pub fn newest_first(&self) -> Vec<ReviewedRecord> {
        self.items.iter().rev().cloned().collect()
    }

    /// Records pushed since start.
    pub fn seen(&self) -> u64 {
        self.seq
    }
}

/// Append the fields to `out`, separated by " | ", whitespace runs as one space, at most `max` characters.
pub fn truncate_into<'a>(out: &mut String, fields: impl IntoIterator<Item = &'a str>, max: usize) {
    let mut chars = 0usize;
    let mut pending_space = false;
    for (i, f) in fields.into_iter().enumerate() {
        if i > 0 && chars > 0 {
            for c in " | ".chars() {
                if chars == max {
                    out.push('…');
                    return;
                }
                out.push(c);
                chars += 1;
            }
            pending_space = false;
        }
        for c in f.trim().chars() {
            if c.is_whitespace() {
                pending_space = true;
                continue;
            }
            let need = 1 + pending_space as usize;
            if chars + need > max {
                out.push('…');
                return;
            }
            if pending_space {
                out.push(' ');
                pending_space = false;
                chars += 1;
            }
            out.push(c);
            chars += 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keeps_the_last_n_newest_first() {
        let mut r = ReviewRing::new(2, 100);
        r.push(Some("t-1"), "billing", 0.4, "low_confidence", ["a"]);
        r.push(Some("t-2"), "returns", 0.3, "low_confidence", ["b"]);
        r.push(None, "shipping", 0.2, "rule", ["c"]);
        let v = r.newest_first();
        assert_eq!(v.iter().map(|x| x.seq).collect::<Vec<_>>(), vec![3, 2]);
        assert_eq!((v[0].id.as_str(), v[0].class.as_str(), v[0].text.as_str()), ("", "shipping", "c"));
        assert_eq!(r.seen(), 3);
    }

    #[test]
    fn text_is_flattened_and_cut_on_characters() {
        let mut s = String::new();
        truncate_into(&mut s, ["  Stove  leaks\n\nfuel ", "please help"], 100);
        assert_eq!(s, "Stove leaks fuel | please help");
        let mut s = String::new();
        truncate_into(&mut s, ["ÄÖÜ äöü ßßß"], 6);
        assert_eq!(s, "ÄÖÜ äö…");
        assert_eq!(s.chars().count(), 7);
        let mut s = String::new();
        truncate_into(&mut s, ["", "body only"], 100);
        assert_eq!(s, "body only");
    }
}
