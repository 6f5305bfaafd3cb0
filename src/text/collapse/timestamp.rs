//! Dates and times: ISO 8601 dates and date-times, slash and dot dates, clock times with fractions and zones.

#[inline]
pub fn matches(b: &[u8]) -> bool {
    if let Some(rest) = date(b) {
        if rest.is_empty() {
            return true;
        }
        if matches!(rest[0], b'T' | b't' | b'_') {
            return time(&rest[1..]);
        }
        return false;
    }
    time(b)
}

/// A date at the start of `b`; returns what follows it.
fn date(b: &[u8]) -> Option<&[u8]> {
    // YYYY-MM-DD, YYYY/MM/DD, YYYY.MM.DD
    if b.len() >= 8 && b[..4].iter().all(u8::is_ascii_digit) && matches!(b[4], b'-' | b'/' | b'.') {
        let sep = b[4];
        let (m, r) = digits(&b[5..], 1, 2)?;
        if r.first() != Some(&sep) || !(1..=12).contains(&m) {
            return None;
        }
        let (d, r) = digits(&r[1..], 1, 2)?;
        if !(1..=31).contains(&d) {
            return None;
        }
        return Some(r);
    }
    // DD/MM/YYYY or MM/DD/YYYY (also with '.' or '-')
    let (a, r) = digits(b, 1, 2)?;
    let sep = *r.first()?;
    if !matches!(sep, b'/' | b'.' | b'-') || a == 0 || a > 31 {
        return None;
    }
    let (c, r) = digits(&r[1..], 1, 2)?;
    if r.first() != Some(&sep) || c == 0 || c > 31 {
        return None;
    }
    let (_, r2) = digits(&r[1..], 4, 4)?;
    Some(r2)
}

/// A clock time filling all of `b`: H:MM[:SS[.fff]][zone].
fn time(b: &[u8]) -> bool {
    let Some((h, r)) = digits(b, 1, 2) else { return false };
    if h > 23 || r.first() != Some(&b':') {
        return false;
    }
    let Some((m, mut r)) = digits(&r[1..], 2, 2) else { return false };
    if m > 59 {
        return false;
    }
    if r.first() == Some(&b':') {
        let Some((s, r2)) = digits(&r[1..], 2, 2) else { return false };
        if s > 60 {
            return false;
        }
        r = r2;
        if matches!(r.first(), Some(b'.') | Some(b',')) {
            let n = r[1..].iter().take_while(|c| c.is_ascii_digit()).count();
            if n == 0 || n > 9 {
                return false;
            }
            r = &r[1 + n..];
        }
    }
    zone(r)
}

fn zone(r: &[u8]) -> bool {
    match r {
        [] | [b'Z'] | [b'z'] => true,
        [b'+' | b'-', h1, h2] => h1.is_ascii_digit() && h2.is_ascii_digit(),
        [b'+' | b'-', h1, h2, b':', m1, m2] | [b'+' | b'-', h1, h2, m1, m2] => {
            [h1, h2, m1, m2].iter().all(|c| c.is_ascii_digit())
        }
        _ => false,
    }
}

/// Between `min` and `max` leading digits: their value and the rest.
fn digits(b: &[u8], min: usize, max: usize) -> Option<(u32, &[u8])> {
    let n = b.iter().take(max + 1).take_while(|c| c.is_ascii_digit()).count();
    if n < min || n > max {
        return None;
    }
    let v = b[..n].iter().fold(0u32, |a, &c| a * 10 + (c - b'0') as u32);
    Some((v, &b[n..]))
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn timestamps() {
        for ok in [
            "2026-01-05",
            "2026-01-05T10:00:00Z",
            "2026-01-05T10:00:00.123+01:00",
            "2026/1/5",
            "05/01/2026",
            "10:00",
            "10:00:00",
            "23:59:59,999",
            "2026-01-05T10:00:00-0500",
        ] {
            assert!(matches(ok.as_bytes()), "{ok}");
        }
        for bad in ["2026-13-05", "25:00", "10:0", "2026-01-05X", "1.2.3", "10:00:00:00", "4711-AB"] {
            assert!(!matches(bad.as_bytes()), "{bad}");
        }
    }
}
