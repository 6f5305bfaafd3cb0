//! Case folding: Unicode lowercase, with an allocation-free ASCII fast path into a reusable buffer.

/// Lowercase `s` into `buf` (cleared first) and return it.
#[inline]
pub fn fold_into<'a>(s: &str, buf: &'a mut String) -> &'a str {
    buf.clear();
    if s.is_ascii() {
        buf.push_str(s);
        // SAFETY-free: make_ascii_lowercase keeps UTF-8 valid.
        buf.make_ascii_lowercase();
    } else {
        for c in s.chars() {
            buf.extend(c.to_lowercase());
        }
    }
    buf.as_str()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folds_ascii_and_unicode() {
        let mut b = String::new();
        assert_eq!(fold_into("Refund", &mut b), "refund");
        assert_eq!(fold_into("ÜBERWEISUNG", &mut b), "überweisung");
        assert_eq!(fold_into("ΣΟΦΙΑ", &mut b), "σοφια");
    }
}
