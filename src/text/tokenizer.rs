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
fn is_hard_separator(c: char) -> bool {
    matches!(c, '=' | ',' | ';' | '"' | '\'' | '(' | ')' | '[' | ']' | '{' | '}' | '<' | '>' | '|' | '`')
}

#[inline]
fn is_word_char(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

#[inline]
fn trim_punct(s: &str) -> &str {
    s.trim_end_matches(['.', ':', '!', '?', ',', ';']).trim_start_matches(['*', '#'])
}

/// Call `emit` with every token of `text`, in order.
#[inline]
pub fn for_each_token<F: FnMut(&str)>(text: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    for chunk in text.split(char::is_whitespace) {
        if chunk.is_empty() {
            continue;
        }
        let trimmed = chunk.trim_matches(|c: char| is_hard_separator(c) || matches!(c, '.' | ':' | '!' | '?'));
        if cfg.collapse.urls && collapse::url::matches(trimmed.as_bytes()) {
            emit(collapse::URL);
            continue;
        }
        if chunk.contains(is_hard_separator) {
            for part in chunk.split(is_hard_separator) {
                part_tokens(part, cfg, lower, emit);
            }
        } else {
            part_tokens(chunk, cfg, lower, emit);
        }
    }
}

#[inline]
fn part_tokens<F: FnMut(&str)>(part: &str, cfg: &TokenConfig, lower: &mut String, emit: &mut F) {
    let part = trim_punct(part);
    if part.is_empty() {
        return;
    }
    if let Some(tok) = classify_chunk(part, &cfg.collapse) {
        emit(tok);
        return;
    }
    for piece in part.split(|c: char| !is_word_char(c)) {
        if piece.is_empty() {
            continue;
        }
        if let Some(tok) = classify_piece(piece, &cfg.collapse) {
            emit(tok);
            continue;
        }
        let n = if piece.is_ascii() { piece.len() } else { piece.chars().count() };
        if n < cfg.min_len || n > cfg.max_len {
            continue;
        }
        let word = if cfg.lowercase { fold_into(piece, lower) } else { piece };
        if let Some(stop) = cfg.stop_words {
            if stop.contains(word) {
                continue;
            }
        }
        emit(word);
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
    fn stop_words_are_dropped_when_on() {
        let mut c = cfg();
        c.stop_words = Some(crate::text::stopwords::english());
        assert_eq!(toks("the refund is late", &c), ["refund", "late"]);
    }
}
