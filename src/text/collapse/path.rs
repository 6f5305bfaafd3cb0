//! File paths: absolute Unix paths, home- and dot-relative paths, Windows drive and UNC paths.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    let body: &[u8] = if let Some(r) = b.strip_prefix(b"~/").or_else(|| b.strip_prefix(b"./")) {
        r
    } else if let Some(r) = b.strip_prefix(b"../") {
        r
    } else if let Some(r) = b.strip_prefix(b"\\\\") {
        r
    } else if b.len() > 3 && b[0].is_ascii_alphabetic() && b[1] == b':' && matches!(b[2], b'\\' | b'/') {
        &b[3..]
    } else if let Some(r) = b.strip_prefix(b"/") {
        // A single segment like "/s" is too often a unit or a flag; want two, or a dot.
        if !(r.contains(&b'/') || r.contains(&b'.')) {
            return false;
        }
        r
    } else {
        return false;
    };
    body.iter().any(|c| c.is_ascii_alphanumeric())
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn paths() {
        assert!(matches(b"/var/log/app.log"));
        assert!(matches(b"/etc/trailhead.conf"));
        assert!(matches(b"~/exports/orders.csv"));
        assert!(matches(b"./bin/run"));
        assert!(matches(b"C:\\temp\\x.txt"));
        assert!(matches(b"\\\\share\\drop"));
        assert!(!matches(b"/"));
        assert!(!matches(b"/s"));
        assert!(!matches(b"and/or"));
        assert!(!matches(b"//"));
    }
}
