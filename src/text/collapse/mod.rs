//! Term collapsing: recognise volatile terms and replace each by the class token of its family. One family per file.
//!
//! Families are tried on a chunk (text between whitespace and hard
//! separators) in a fixed order, most specific first, so a UUID is never
//! taken for a hex id and a timestamp never for an IPv6 address.

pub mod codes;
pub mod email;
pub mod hex;
pub mod ip;
pub mod numbers;
pub mod path;
pub mod timestamp;
pub mod url;
pub mod uuid;

use crate::settings::CollapseSettings;

pub const URL: &str = "<url>";
pub const EMAIL: &str = "<email>";
pub const UUID: &str = "<uuid>";
pub const TIMESTAMP: &str = "<ts>";
pub const IPV4: &str = "<ipv4>";
pub const IPV6: &str = "<ipv6>";
pub const PATH: &str = "<path>";
pub const HEX: &str = "<hex>";
pub const NUMBER: &str = "<num>";
pub const CODE: &str = "<code>";

/// Every built-in class token, for documentation and tests.
pub const ALL_TOKENS: &[&str] = &[URL, EMAIL, UUID, TIMESTAMP, IPV4, IPV6, PATH, HEX, NUMBER, CODE];

/// A cheap one-pass summary of a chunk, so most words skip every family test.
#[derive(Debug, Default, Clone, Copy)]
pub struct Shape {
    pub digits: u32,
    pub alphas: u32,
    pub at: bool,
    pub colon: bool,
    pub slash: bool,
    pub backslash: bool,
    pub dot: bool,
    pub dash: bool,
    pub non_ascii: bool,
}

impl Shape {
    #[inline]
    pub fn of(s: &[u8]) -> Shape {
        let mut sh = Shape::default();
        for &b in s {
            match b {
                b'0'..=b'9' => sh.digits += 1,
                b'a'..=b'z' | b'A'..=b'Z' => sh.alphas += 1,
                b'@' => sh.at = true,
                b':' => sh.colon = true,
                b'/' => sh.slash = true,
                b'\\' => sh.backslash = true,
                b'.' => sh.dot = true,
                b'-' => sh.dash = true,
                0x80..=0xff => sh.non_ascii = true,
                _ => {}
            }
        }
        sh
    }
}

/// The class token for a whole chunk if one enabled family claims it, else the chunk's shape.
#[inline]
pub fn classify_chunk(s: &str, on: &CollapseSettings) -> Result<&'static str, Shape> {
    let b = s.as_bytes();
    let sh = Shape::of(b);
    classify_shaped(s, &sh, on).ok_or(sh)
}

#[inline]
fn classify_shaped(s: &str, sh: &Shape, on: &CollapseSettings) -> Option<&'static str> {
    let b = s.as_bytes();
    if sh.non_ascii {
        return None;
    }
    let www = b.len() > 4 && b[..4].eq_ignore_ascii_case(b"www.");
    if on.urls && (sh.colon || www) && url::matches(b) {
        return Some(URL);
    }
    if on.emails && sh.at && email::matches(b) {
        return Some(EMAIL);
    }
    if on.uuids && b.len() == 36 && sh.dash && uuid::matches(b) {
        return Some(UUID);
    }
    if on.timestamps && sh.digits >= 3 && (sh.colon || sh.dash || sh.slash || sh.dot) && timestamp::matches(b) {
        return Some(TIMESTAMP);
    }
    if on.ip_addresses {
        if sh.dot && sh.digits >= 4 && ip::is_ipv4(b) {
            return Some(IPV4);
        }
        if sh.colon && ip::is_ipv6(b) {
            return Some(IPV6);
        }
    }
    if on.paths && (sh.slash || sh.backslash) && path::matches(b) {
        return Some(PATH);
    }
    if sh.digits > 0 {
        return classify_piece(s, on);
    }
    None
}

/// The class token for a word piece (letters, digits and `_` only), if any.
#[inline]
pub fn classify_piece(s: &str, on: &CollapseSettings) -> Option<&'static str> {
    let b = s.as_bytes();
    if on.hex_ids && hex::matches(b) {
        return Some(HEX);
    }
    if on.numbers && numbers::matches(b) {
        return Some(NUMBER);
    }
    if on.hex_ids && codes::matches(b) {
        return Some(CODE);
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn all() -> CollapseSettings {
        CollapseSettings::all(true)
    }

    #[test]
    fn order_of_families() {
        let on = all();
        let classify_chunk = |s: &str, on: &CollapseSettings| super::classify_chunk(s, on).ok();
        assert_eq!(classify_chunk("https://shop.example.test/a?b", &on), Some(URL));
        assert_eq!(classify_chunk("ana@trail.example", &on), Some(EMAIL));
        assert_eq!(classify_chunk("3f2b8c1e-0a4d-4e5f-9a6b-7c8d9e0f1a2b", &on), Some(UUID));
        assert_eq!(classify_chunk("2026-01-05T10:00:00Z", &on), Some(TIMESTAMP));
        assert_eq!(classify_chunk("10:00:00", &on), Some(TIMESTAMP));
        assert_eq!(classify_chunk("10.0.0.12", &on), Some(IPV4));
        assert_eq!(classify_chunk("fe80::1", &on), Some(IPV6));
        assert_eq!(classify_chunk("/var/log/app.log", &on), Some(PATH));
        assert_eq!(classify_chunk("0x1f3a", &on), Some(HEX));
        assert_eq!(classify_chunk("4711", &on), Some(NUMBER));
        assert_eq!(classify_chunk("refund", &on), None);
    }

    #[test]
    fn switched_off_family_is_not_collapsed() {
        let classify_chunk = |s: &str, on: &CollapseSettings| super::classify_chunk(s, on).ok();
        let mut on = all();
        on.ip_addresses = false;
        assert_eq!(classify_chunk("10.0.0.12", &on), None);
        let mut on = all();
        on.timestamps = false;
        assert_eq!(classify_chunk("2026-01-05", &on), None);
    }
}
