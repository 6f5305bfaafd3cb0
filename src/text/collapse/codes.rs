//! Codes: letter-digit mixes such as part and reference numbers (ORD83412, sku4471b), at least four characters with two or more digits.
//!
//! Switched with the hex-id family: both are opaque identifiers.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    if b.len() < 4 {
        return false;
    }
    let mut digits = 0;
    let mut letters = 0;
    for &c in b {
        match c {
            b'0'..=b'9' => digits += 1,
            b'a'..=b'z' | b'A'..=b'Z' => letters += 1,
            b'_' => {}
            _ => return false,
        }
    }
    digits >= 2 && letters >= 1
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn codes() {
        assert!(matches(b"ORD83412"));
        assert!(matches(b"sku4471b"));
        assert!(matches(b"x86_64"));
        assert!(!matches(b"ipv4"));
        assert!(!matches(b"mp3"));
        assert!(!matches(b"4711"));
        assert!(!matches(b"refund"));
    }
}
