//! IP addresses: dotted IPv4 (optionally with `:port` or `/prefix`) and IPv6 (full or `::`-compressed).

#[inline]
pub fn is_ipv4(b: &[u8]) -> bool {
    // Strip an optional :port or /prefix made of digits.
    let core = match b.iter().position(|&c| c == b':' || c == b'/') {
        Some(p) => {
            let rest = &b[p + 1..];
            if rest.is_empty() || rest.len() > 5 || !rest.iter().all(u8::is_ascii_digit) {
                return false;
            }
            &b[..p]
        }
        None => b,
    };
    let mut groups = 0;
    for g in core.split(|&c| c == b'.') {
        if g.is_empty() || g.len() > 3 || !g.iter().all(u8::is_ascii_digit) {
            return false;
        }
        let v: u32 = g.iter().fold(0, |a, &c| a * 10 + (c - b'0') as u32);
        if v > 255 {
            return false;
        }
        groups += 1;
    }
    groups == 4
}

#[inline]
pub fn is_ipv6(b: &[u8]) -> bool {
    let core = match b.iter().position(|&c| c == b'/' || c == b'%') {
        Some(p) => &b[..p],
        None => b,
    };
    if core.len() < 2 || core.iter().filter(|&&c| c == b':').count() < 2 {
        return false;
    }
    let compressed = windows_count(core, b"::");
    if compressed > 1 {
        return false;
    }
    let mut groups = 0;
    let last = core.iter().filter(|&&c| c == b':').count();
    for (i, g) in core.split(|&c| c == b':').enumerate() {
        if g.is_empty() {
            continue;
        }
        if i == last && g.contains(&b'.') {
            if !is_ipv4(g) {
                return false;
            }
            groups += 2;
            continue;
        }
        if g.len() > 4 || !g.iter().all(u8::is_ascii_hexdigit) {
            return false;
        }
        groups += 1;
    }
    if compressed == 1 {
        groups <= 7
    } else {
        groups == 8
    }
}

fn windows_count(hay: &[u8], needle: &[u8]) -> usize {
    hay.windows(needle.len()).filter(|w| *w == needle).count()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ipv4() {
        assert!(is_ipv4(b"10.0.0.12"));
        assert!(is_ipv4(b"192.168.1.1:8080"));
        assert!(is_ipv4(b"10.0.0.0/8"));
        assert!(!is_ipv4(b"10.0.0"));
        assert!(!is_ipv4(b"256.1.1.1"));
        assert!(!is_ipv4(b"1.2.3.4.5"));
        assert!(!is_ipv4(b"1.2.3.4:"));
    }

    #[test]
    fn ipv6() {
        assert!(is_ipv6(b"fe80::1"));
        assert!(is_ipv6(b"::1"));
        assert!(is_ipv6(b"2001:db8:0:0:0:0:2:1"));
        assert!(is_ipv6(b"::ffff:10.0.0.1"));
        assert!(is_ipv6(b"fe80::1%eth0"));
        assert!(!is_ipv6(b"10:00:00"));
        assert!(!is_ipv6(b"1::2::3"));
        assert!(!is_ipv6(b"error:warn:info"));
    }
}
