//! Numbers: optional sign, digits with `,` group separators and at most one decimal point, and an optional `%` or unit suffix of up to three letters (35ms, 2kb).

#[inline]
pub fn matches(b: &[u8]) -> bool {
    let mut i = 0;
    if matches!(b.first(), Some(b'+') | Some(b'-')) {
        i = 1;
    }
    let start = i;
    let mut last_digit = false;
    let mut point = false;
    while i < b.len() {
        match b[i] {
            b'0'..=b'9' => last_digit = true,
            b',' if !point && last_digit && i + 1 < b.len() && b[i + 1].is_ascii_digit() => last_digit = false,
            b'.' if !point && last_digit && i + 1 < b.len() && b[i + 1].is_ascii_digit() => {
                point = true;
                last_digit = false;
            }
            _ => break,
        }
        i += 1;
    }
    if i == start || !last_digit {
        return false;
    }
    let rest = &b[i..];
    rest.is_empty()
        || rest == b"%"
        || (rest.len() <= 3 && rest.iter().all(u8::is_ascii_alphabetic))
}

#[cfg(test)]
mod tests {
    use super::matches;

    #[test]
    fn numbers() {
        for ok in ["42", "-3.5", "+7", "1,200", "1,200.50", "15%", "35ms", "2kb", "3.14"] {
            assert!(matches(ok.as_bytes()), "{ok}");
        }
        for bad in ["", "-", "1.", "1..2", "abc", "12abcd", "1.2.x", ".5", "1.2.3", "10.0.0.12"] {
            assert!(!matches(bad.as_bytes()), "{bad}");
        }
    }
}
