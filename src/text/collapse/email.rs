//! E-mail addresses: `local@domain.tld`.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    let Some(at) = b.iter().position(|&c| c == b'@') else { return false };
    let (local, domain) = (&b[..at], &b[at + 1..]);
    if local.is_empty() || domain.len() < 3 || domain.contains(&b'@') {
        return false;
    }
    if !local.iter().all(|c| c.is_ascii_alphanumeric() || matches!(c, b'.' | b'_' | b'%' | b'+' | b'-')) {
        return false;
    }
    let mut labels = 0;
    let mut last: &[u8] = &[];
    for label in domain.split(|&c| c == b'.') {
        if label.is_empty() || !label.iter().all(|c| c.is_ascii_alphanumeric() || *c == b'-') {
            return false;
        }
        labels += 1;
        last = label;
    }
    labels >= 2 && last.len() >= 2 && last.iter().all(|c| c.is_ascii_alphabetic())
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn emails() {
        assert!(matches(b"ana.lund@trail.example"));
        assert!(matches(b"ops+alerts@mail-relay.corp.test"));
        assert!(!matches(b"@example.test"));
        assert!(!matches(b"ana@localhost"));
        assert!(!matches(b"ana@@x.test"));
        assert!(!matches(b"ana@x..test"));
    }
}
