//! URLs: `scheme://rest` with a letter-led scheme, or a `www.` host.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    if b.len() > 4 && b[..4].eq_ignore_ascii_case(b"www.") {
        return b[4..].iter().any(|c| c.is_ascii_alphanumeric()) && b[4..].contains(&b'.');
    }
    let Some(pos) = b.iter().position(|&c| c == b':') else { return false };
    if b.get(pos + 1) != Some(&b'/') || b.get(pos + 2) != Some(&b'/') {
        return false;
    }
    if pos == 0 || pos > 16 || !b[0].is_ascii_alphabetic() {
        return false;
    }
    let scheme_ok = b[..pos].iter().all(|c| c.is_ascii_alphanumeric() || matches!(c, b'+' | b'-' | b'.'));
    scheme_ok && b.len() > pos + 3
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn urls() {
        assert!(matches(b"https://shop.example.test/cart?id=3"));
        assert!(matches(b"ftp://files.example.test"));
        assert!(matches(b"www.example.test"));
        assert!(!matches(b"https://"));
        assert!(!matches(b"://x"));
        assert!(!matches(b"10:00:00"));
        assert!(!matches(b"www."));
    }
}
