//! UUIDs in the canonical 8-4-4-4-12 hex form.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    b.len() == 36
        && b.iter().enumerate().all(|(i, &c)| match i {
            8 | 13 | 18 | 23 => c == b'-',
            _ => c.is_ascii_hexdigit(),
        })
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn uuids() {
        assert!(matches(b"3f2b8c1e-0a4d-4e5f-9a6b-7c8d9e0f1a2b"));
        assert!(matches(b"3F2B8C1E-0A4D-4E5F-9A6B-7C8D9E0F1A2B"));
        assert!(!matches(b"3f2b8c1e-0a4d-4e5f-9a6b-7c8d9e0f1a2"));
        assert!(!matches(b"3f2b8c1e-0a4d-4e5f-9a6b_7c8d9e0f1a2b"));
        assert!(!matches(b"zf2b8c1e-0a4d-4e5f-9a6b-7c8d9e0f1a2b"));
    }
}
