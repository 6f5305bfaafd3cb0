//! Tokeniser: whitespace chunks, then hard separators, then word pieces; each chunk or piece is offered to the collapsing families first.
//!
//! A chunk is text between whitespace. A URL is recognised on the whole
//! chunk (it may contain separators). Otherwise the chunk is split at hard
//! separators (`= , ; " ' ( ) [ ] { } < > | \``), each part is trimmed of
//! trailing sentence punctuation and offered to the families; a part no
//! family claims is split into word pieces (runs of letters, digits and `_`),
//! which may still collapse as numbers, hex ids or codes, and are otherwise
//! case-folded words.

use std::collections::HashSet;

use super::collapse::{self, classify_chunk, classify_piece};
use super::fold::fold_into;
use crate::settings::CollapseSettings;

/// What the tokeniser needs to know, taken from analyzer settings.
#[derive(Debug, Clone)]
pub struct TokenConfig {
    pub collapse: CollapseSettings,
    pub lowercase: bool,
    pub min_len: usize,
    pub max_len: usize,
    pub stop_words: Option<&'static HashSet<&'static str>>,
}

#[inline]
const fn is_separator_byte(b: u8) -> bool {
    matches!(b, b'=' | b',' | b';' | b'"' | b'\'' | b'(' | b')' | b'[' | b']' | b'{' | b'}' | b'<' | b'>' | b'|' | b'`')
}

#[inline]
fn is_word_char(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

/// Trailing sentence punctuation and leading list markers off (ASCII bytes, so
/// slicing at them is always on a char boundary).
#[inline]
fn trim_punct(s: &str) -> &str {
    let b = s.as_bytes();
    let mut end = b.len();
    while end > 0 && matches!(b[end - 1], b'.' | b':' | b'!' | b'?' | b',' | b';') {
        end -= 1;
    }
    let mut start = 0;
    while start < end && matches!(b[start], b'*' | b'#') {
        start += 1;
    }
    &s[start..end]
}

/// Separators and sentence punctuation off both ends, for the URL test.
#[inline]
fn trim_for_url(s: &str) -> &str {
    let b = s.as_bytes();
    let strip = |c: u8| is_separator_byte(c) || matches!(c, b'.' | b':' | b'!' | b'?');
    let mut end = b.len();
    while end > 0 && strip(b[end - 1]) {
        end -= 1;
    }
    let mut start = 0;
    while start < end && strip(b[start]) {
        start += 1;
    }
    &s[start..end]
}

/// Call `emit` with every token of `text`, in order.
#[inline]
pub fn for_each_token<F: FnMut(&str)>(text: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    if text.is_ascii() {
        ascii_tokens(text, cfg, lower, emit);
        return;
    }
    for chunk in text.split(char::is_whitespace) {
        if !chunk.is_empty() {
            chunk_tokens(chunk, cfg, lower, emit);
        }
    }
}

/// Byte classes for the ASCII fast path.
const WORD: u8 = 1;
const SPECIAL: u8 = 2; // a byte that may start a collapsible family or a separator
const SPACE: u8 = 4;
const SEP: u8 = 8; // a hard separator
const COLON: u8 = 16;

const fn byte_classes() -> [u8; 256] {
    let mut t = [SPECIAL; 256];
    let mut c = 0;
    while c < 256 {
        let b = c as u8;
        t[c] = if b.is_ascii_lowercase() || b.is_ascii_uppercase() || b == b'_' {
            WORD
        } else if b.is_ascii_digit() {
            WORD | SPECIAL
        } else if b == b' ' || b == b'\t' || b == b'\n' || b == b'\r' || b == 0x0b || b == 0x0c {
            SPACE
        } else if matches!(b, b'.' | b'!' | b'?' | b'-' | b'+' | b'*' | b'#' | b'&' | b'~' | b'$' | b'^') {
            0
        } else if is_separator_byte(b) {
            SPECIAL | SEP
        } else if b == b':' {
            SPECIAL | COLON
        } else {
            SPECIAL
        };
        c += 1;
    }
    t
}

static CLASSES: [u8; 256] = byte_classes();

/// ASCII text: one pass finds each whitespace chunk and whether anything in it
/// could be collapsible (a digit, `@`, `:`, `/`, `\\`, a hard separator...).
/// Chunks of plain words and sentence punctuation skip every family test.
#[inline]
fn ascii_tokens<F: FnMut(&str)>(text: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    let b = text.as_bytes();
    let n = b.len();
    let mut i = 0;
    while i < n {
        while i < n && CLASSES[b[i] as usize] & SPACE != 0 {
            i += 1;
        }
        let start = i;
        let mut flags = 0u8;
        while i < n && CLASSES[b[i] as usize] & SPACE == 0 {
            flags |= CLASSES[b[i] as usize];
            i += 1;
        }
        if start == i {
            break;
        }
        let chunk = &text[start..i];
        let plain = flags & SPECIAL == 0
            && !(chunk.len() > 4 && chunk.as_bytes()[..4].eq_ignore_ascii_case(b"www."))
            && !(chunk.len() == 36 && cfg.collapse.uuids);
        if plain {
            plain_words(chunk, cfg, lower, emit);
        } else {
            chunk_tokens_flagged(chunk, flags, cfg, lower, emit);
        }
    }
}

/// Letters, `_` and sentence punctuation only: split into words, fold, filter.
#[inline]
fn plain_words<F: FnMut(&str)>(chunk: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    ascii_pieces(chunk, |p, n| word(p, n, cfg, lower, emit));
}

/// Call `f` with each run of word bytes (letters, digits, `_`) of ASCII text and its length.
#[inline]
fn ascii_pieces<'a>(text: &'a str, mut f: impl FnMut(&'a str, usize)) {
    let b = text.as_bytes();
    let mut i = 0;
    while i < b.len() {
        while i < b.len() && CLASSES[b[i] as usize] & WORD == 0 {
            i += 1;
        }
        let s = i;
        while i < b.len() && CLASSES[b[i] as usize] & WORD != 0 {
            i += 1;
        }
        if s < i {
            f(&text[s..i], i - s);
        }
    }
}

/// A word piece no family claimed: length limits, folding, stop words.
#[inline]
fn word<F: FnMut(&str)>(piece: &str, chars: usize, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    if chars < cfg.min_len || chars > cfg.max_len {
        return;
    }
    let w = if cfg.lowercase { fold_into(piece, lower) } else { piece };
    if let Some(stop) = cfg.stop_words {
        if stop.contains(w) {
            return;
        }
    }
    emit(w);
}

/// The general path for one whitespace chunk.
#[inline]
fn chunk_tokens<F: FnMut(&str)>(chunk: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    let mut flags = 0;
    for &c in chunk.as_bytes() {
        flags |= CLASSES[c as usize];
    }
    chunk_tokens_flagged(chunk, flags, cfg, lower, emit);
}

/// One whitespace chunk whose byte classes are known.
#[inline]
fn chunk_tokens_flagged<F: FnMut(&str)>(chunk: &str, flags: u8, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    if cfg.collapse.urls {
        let t = trim_for_url(chunk).as_bytes();
        let www = t.len() > 4 && t[..4].eq_ignore_ascii_case(b"www.");
        if (flags & COLON != 0 || www) && collapse::url::matches(t) {
            emit(collapse::URL);
            return;
        }
    }
    if flags & SEP == 0 {
        part_tokens(chunk, cfg, lower, emit);
        return;
    }
    let b = chunk.as_bytes();
    let mut at = 0;
    for (i, &c) in b.iter().enumerate() {
        if is_separator_byte(c) {
            part_tokens(&chunk[at..i], cfg, lower, emit);
            at = i + 1;
        }
    }
    part_tokens(&chunk[at..], cfg, lower, emit);
}

#[inline]
fn part_tokens<F: FnMut(&str)>(part: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    let part = trim_punct(part);
    if part.is_empty() {
        return;
    }
    let digits = match classify_chunk(part, &cfg.collapse) {
        Ok(tok) => {
            emit(tok);
            return;
        }
        Err(shape) => shape.digits > 0 || shape.non_ascii,
    };
    if !digits {
        // No digit anywhere: no piece can be a number, hex id or code.
        ascii_pieces(part, |p, n| word(p, n, cfg, lower, emit));
        return;
    }
    if part.is_ascii() {
        ascii_pieces(part, |p, n| piece_token(p, n, cfg, lower, emit));
        return;
    }
    for piece in part.split(|c: char| !is_word_char(c)) {
        if !piece.is_empty() {
            let n = if piece.is_ascii() { piece.len() } else { piece.chars().count() };
            piece_token(piece, n, cfg, lower, emit);
        }
    }
}

#[inline]
fn piece_token<F: FnMut(&str)>(piece: &str, chars: usize, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    match classify_piece(piece, &cfg.collapse) {
        Some(tok) => emit(tok),
        None => word(piece, chars, cfg, lower, emit),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cfg() -> TokenConfig {
        TokenConfig {
            collapse: CollapseSettings::all(true),
            lowercase: true,
            min_len: 2,
            max_len: 40,
            stop_words: None,
        }
    }

    fn toks(text: &str, c: &TokenConfig) -> Vec<String> {
        let mut out = Vec::new();
        let mut buf = String::new();
        for_each_token(text, c, &mut buf, &mut |t| out.push(t.to_string()));
        out
    }

    #[test]
    fn words_are_folded_and_split_on_punctuation() {
        assert_eq!(toks("Refund: the Return-Label, please!", &cfg()), ["refund", "the", "return", "label", "please"]);
    }

    #[test]
    fn key_value_log_fields_split_at_equals() {
        assert_eq!(
            toks("svc=checkout latency=35ms peer=10.0.0.7:443 user=ana@trail.example", &cfg()),
            ["svc", "checkout", "latency", "<num>", "peer", "<ipv4>", "user", "<email>"]
        );
    }

    #[test]
    fn url_with_query_is_one_token() {
        assert_eq!(toks("see (https://shop.example.test/a?b=1,c=2).", &cfg()), ["see", "<url>"]);
    }

    #[test]
    fn length_limits_drop_words_but_keep_class_tokens() {
        let mut c = cfg();
        c.max_len = 5;
        assert_eq!(toks("a 7 toolongword short", &c), ["<num>", "short"]);
    }

    #[test]
    fn unicode_words() {
        assert_eq!(toks("Überweisung fehlgeschlagen — naïve café", &cfg()), ["überweisung", "fehlgeschlagen", "naïve", "café"]);
    }

    #[test]
    fn ascii_fast_path_equals_the_general_path() {
        // Random ASCII soup heavy in the bytes that matter; both paths must agree exactly.
        let alphabet = b"abcXYZ_019 .,:;!?-+*#@/\\=()[]<>'\"|~%&\twww0x";
        let mut rng = crate::eval::folds::SplitMix64::new(11);
        let c = cfg();
        for _ in 0..20_000 {
            let len = rng.below(40) as usize;
            let s: String = (0..len).map(|_| alphabet[rng.below(alphabet.len() as u64) as usize] as char).collect();
            let mut fast = Vec::new();
            let mut buf = String::new();
            ascii_tokens(&s, &c, &mut buf, &mut |t| fast.push(t.to_string()));
            let mut slow = Vec::new();
            for chunk in s.split(char::is_whitespace).filter(|c| !c.is_empty()) {
                chunk_tokens(chunk, &c, &mut buf, &mut |t| slow.push(t.to_string()));
            }
            assert_eq!(fast, slow, "{s:?}");
        }
    }

    #[test]
    fn stop_words_are_dropped_when_on() {
        let mut c = cfg();
        c.stop_words = Some(crate::text::stopwords::english());
        assert_eq!(toks("the refund is late", &c), ["refund", "late"]);
    }
}
