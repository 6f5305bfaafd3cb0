//! Hex ids: `0x`-prefixed hex, or six or more hex digits mixing digits and letters (commit ids, request ids).

#[inline]
pub fn matches(b: &[u8]) -> bool {
    if b.len() > 2 && (b.starts_with(b"0x") || b.starts_with(b"0X")) {
        return b[2..].iter().all(u8::is_ascii_hexdigit);
    }
    if b.len() < 6 {
        return false;
    }
    let mut digit = false;
    let mut letter = false;
    for &c in b {
        match c {
            b'0'..=b'9' => digit = true,
            b'a'..=b'f' | b'A'..=b'F' => letter = true,
            _ => return false,
        }
    }
    digit && letter
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn hex_ids() {
        assert!(matches(b"0x1f3a"));
        assert!(matches(b"a3f9c2e1d4"));
        assert!(matches(b"DEADBEEF01"));
        assert!(!matches(b"deadbeef"), "letters only stay words");
        assert!(!matches(b"123456"), "digits only are numbers");
        assert!(!matches(b"a1b2"), "too short");
        assert!(!matches(b"0x"));
        assert!(!matches(b"a1b2c3g"));
    }
}
