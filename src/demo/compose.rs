//! Filling `{slot}` templates from the vocabulary with seeded random values, and seeded typos; pure functions over a `SplitMix64`.

use super::vocabulary as v;
use crate::eval::folds::SplitMix64;

/// Pick one element uniformly.
pub fn pick<T: Copy>(rng: &mut SplitMix64, items: &[T]) -> T {
    items[rng.below(items.len() as u64) as usize]
}

/// Uniform integer in `lo..=hi`.
pub fn between(rng: &mut SplitMix64, lo: u64, hi: u64) -> u64 {
    lo + rng.below(hi - lo + 1)
}

/// True with probability `p`.
pub fn chance(rng: &mut SplitMix64, p: f64) -> bool {
    p > 0.0 && rng.unit() < p
}

/// Index drawn with probability proportional to `weights`.
pub fn weighted(rng: &mut SplitMix64, weights: &[f64]) -> usize {
    let total: f64 = weights.iter().sum();
    let mut x = rng.unit() * total;
    for (i, w) in weights.iter().enumerate() {
        if x < *w {
            return i;
        }
        x -= w;
    }
    weights.len() - 1
}

/// What a template is about, for slots whose value depends on the record.
#[derive(Debug, Clone, Copy, Default)]
pub struct Context {
    /// `{product}` names a new-line product instead of a core one.
    pub new_line: bool,
    /// The record's own time (unix seconds), for `{ts}` in log layouts.
    pub unix_secs: i64,
    pub millis: u64,
    /// Days before `unix_secs` that `{iso}` dates may fall on.
    pub date_spread_days: u64,
}

/// Pick one template of `list` and expand it.
pub fn fill_one(rng: &mut SplitMix64, list: &[&str], cx: &Context) -> String {
    let t = pick(rng, list);
    fill(rng, t, cx)
}

/// Expand every `{slot}` of `template`. Unknown slots are a bug in the vocabulary and panic.
pub fn fill(rng: &mut SplitMix64, template: &str, cx: &Context) -> String {
    let mut out = String::with_capacity(template.len() + 32);
    let mut rest = template;
    while let Some(open) = rest.find('{') {
        out.push_str(&rest[..open]);
        let close = rest[open..]
            .find('}')
            .map(|c| open + c)
            .unwrap_or_else(|| panic!("unclosed slot in {template:?}"));
        let slot = &rest[open + 1..close];
        slot_value(rng, slot, cx, &mut out);
        rest = &rest[close + 1..];
    }
    out.push_str(rest);
    out
}

fn digits(rng: &mut SplitMix64, n: usize, out: &mut String) {
    for i in 0..n {
        // No leading zero, so numbers read naturally.
        let d = if i == 0 {
            1 + rng.below(9)
        } else {
            rng.below(10)
        };
        out.push(char::from(b'0' + d as u8));
    }
}

fn hex(rng: &mut SplitMix64, n: usize, out: &mut String) {
    const H: &[u8] = b"0123456789abcdef";
    for _ in 0..n {
        out.push(char::from(H[rng.below(16) as usize]));
    }
}

fn push_filled(rng: &mut SplitMix64, list: &[&str], cx: &Context, out: &mut String) {
    let t = pick(rng, list);
    out.push_str(&fill(rng, t, cx));
}

fn slot_value(rng: &mut SplitMix64, slot: &str, cx: &Context, out: &mut String) {
    // Pattern slots of the *_FORMATS lists: {dN}, {hN}, {A}.
    if let Some(n) = slot.strip_prefix('d').and_then(|n| n.parse::<usize>().ok()) {
        return digits(rng, n, out);
    }
    if let Some(n) = slot.strip_prefix('h').and_then(|n| n.parse::<usize>().ok()) {
        return hex(rng, n, out);
    }
    match slot {
        "A" => out.push(char::from(b'A' + rng.below(26) as u8)),
        "product" => out.push_str(if cx.new_line {
            pick(rng, v::NEW_LINE_PRODUCTS)
        } else {
            pick(rng, v::CORE_PRODUCTS)
        }),
        "newp" => out.push_str(pick(rng, v::NEW_LINE_PRODUCTS)),
        "order" => push_filled(rng, v::ORDER_FORMATS, cx, out),
        "part" => push_filled(rng, v::PART_FORMATS, cx, out),
        "tracking" => push_filled(rng, v::TRACKING_FORMATS, cx, out),
        "case" => push_filled(rng, v::CASE_FORMATS, cx, out),
        "carrier" => out.push_str(pick(rng, v::CARRIERS)),
        "city" => out.push_str(pick(rng, v::CITIES)),
        "street" => out.push_str(pick(rng, v::STREETS)),
        "address" => push_filled(rng, v::ADDRESS_FORMATS, cx, out),
        "date" => push_filled(rng, v::DATE_FORMATS, cx, out),
        "iso" => {
            let back = between(rng, 1, cx.date_spread_days.max(1)) as i64;
            let ts = crate::clock::rfc3339(cx.unix_secs - back * 86_400);
            out.push_str(&ts[..10]);
        }
        "month" => out.push_str(pick(rng, v::MONTHS)),
        "weekday" => out.push_str(pick(rng, v::WEEKDAYS)),
        "day" => out.push_str(&between(rng, 1, 28).to_string()),
        "mm" => out.push_str(&format!("{:02}", between(rng, 1, 3))),
        "time" => out.push_str(&format!(
            "{:02}:{:02}",
            between(rng, 7, 22),
            between(rng, 0, 59)
        )),
        "amount" => push_filled(rng, v::AMOUNT_FORMATS, cx, out),
        "n" => out.push_str(&between(rng, 2, 12).to_string()),
        "days" => out.push_str(&between(rng, 3, 45).to_string()),
        "year" => out.push_str(&between(rng, 2019, 2025).to_string()),
        "size" => out.push_str(pick(rng, v::SIZES)),
        "colour" => out.push_str(pick(rng, v::COLOURS)),
        "email" => push_filled(rng, v::EMAIL_FORMATS, cx, out),
        "first" => out.push_str(&pick(rng, v::CUSTOMER_FIRST).to_lowercase()),
        "last" => out.push_str(&pick(rng, v::CUSTOMER_LAST).to_lowercase()),
        "maildomain" => out.push_str(pick(rng, v::MAIL_DOMAINS)),
        "ip" => {
            out.push_str(pick(rng, v::IP_PREFIXES));
            out.push_str(&between(rng, 1, 254).to_string());
        }
        "uuid" => {
            for (i, n) in [8, 4, 4, 4, 12].into_iter().enumerate() {
                if i > 0 {
                    out.push('-');
                }
                hex(rng, n, out);
            }
        }
        "hex" => {
            let n = 2 * between(rng, 4, 8) as usize;
            hex(rng, n, out)
        }
        "name" => out.push_str(pick(rng, v::CUSTOMER_FIRST)),
        "brand" => out.push_str(if chance(rng, 0.5) {
            v::RETAILER
        } else {
            v::RETAILER_SHORT
        }),
        "agent" => out.push_str(pick(rng, v::AGENTS)),
        "sender" => out.push_str(v::SUPPORT_SENDER),
        // Log slots.
        "ms" => out.push_str(&(between(rng, 1, 60) * 500 + between(rng, 0, 499)).to_string()),
        "host" => push_filled(rng, v::HOST_FORMATS, cx, out),
        "port" => out.push_str(pick(
            rng,
            &["443", "8443", "5432", "25", "587", "6379", "9200"],
        )),
        "up" => out.push_str(pick(rng, v::UPSTREAMS)),
        "path" => push_filled(rng, v::PATH_FORMATS, cx, out),
        "sku" => push_filled(rng, v::SKU_FORMATS, cx, out),
        "code" => push_filled(rng, v::CODE_FORMATS, cx, out),
        "bytes" => out.push_str(&(between(rng, 1, 900) * 4096).to_string()),
        "pct" => out.push_str(&between(rng, 91, 100).to_string()),
        "user" => out.push_str(pick(rng, v::SERVICE_ACCOUNTS)),
        "pid" => out.push_str(&between(rng, 100, 65000).to_string()),
        "ts" => {
            let ts = crate::clock::rfc3339(cx.unix_secs);
            out.push_str(&ts[..19]);
            out.push_str(&format!(".{:03}Z", cx.millis));
        }
        _ => panic!("unknown slot {{{slot}}}"),
    }
}

/// Introduce typos into plain lowercase words of four letters or more: each
/// such word is, with probability `rate`, changed by one of: swap two
/// adjacent letters, drop a letter, double a letter (never the first or last
/// letter). A word is a whitespace-separated chunk without its surrounding
/// punctuation; chunks with capitals, digits or symbols (names, codes,
/// addresses, contractions) are never touched. Whitespace is kept as is.
pub fn typos(rng: &mut SplitMix64, text: &str, rate: f64) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    let mut rest = text;
    while !rest.is_empty() {
        let ws = rest
            .find(|c: char| !c.is_whitespace())
            .unwrap_or(rest.len());
        out.push_str(&rest[..ws]);
        rest = &rest[ws..];
        let end = rest.find(char::is_whitespace).unwrap_or(rest.len());
        let chunk = &rest[..end];
        rest = &rest[end..];
        let punct = |c: char| matches!(c, '.' | ',' | '!' | '?' | ':' | ';' | '(' | ')' | '"');
        let core = chunk.trim_matches(punct);
        let plain = core.len() >= 4 && core.bytes().all(|b| b.is_ascii_lowercase());
        if !plain || !chance(rng, rate) {
            out.push_str(chunk);
            continue;
        }
        let lead = chunk.len() - chunk.trim_start_matches(punct).len();
        let b = core.as_bytes();
        let i = between(rng, 1, b.len() as u64 - 3) as usize;
        let mut m = b.to_vec();
        match rng.below(3) {
            0 => m.swap(i, i + 1),
            1 => {
                m.remove(i);
            }
            _ => m.insert(i, b[i]),
        }
        out.push_str(&chunk[..lead]);
        out.push_str(std::str::from_utf8(&m).expect("ascii"));
        out.push_str(&chunk[lead + core.len()..]);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cx() -> Context {
        Context {
            new_line: false,
            unix_secs: 1_772_438_400,
            millis: 7,
            date_spread_days: 30,
        }
    }

    #[test]
    fn every_vocabulary_template_expands_without_leftover_braces() {
        let mut rng = SplitMix64::new(1);
        for s in v::all_strings() {
            // Log layouts quote {msg}, {level} and {service}, which the log generator fills itself.
            let s = s
                .replace("{msg}", "m")
                .replace("{level}", "l")
                .replace("{service}", "s");
            for _ in 0..20 {
                let out = fill(&mut rng, &s, &cx());
                assert!(!out.contains('{') && !out.contains('}'), "{s:?} -> {out:?}");
            }
        }
    }

    #[test]
    fn pattern_slots_have_the_promised_shape() {
        let mut rng = SplitMix64::new(2);
        let d = fill(&mut rng, "{d6}", &cx());
        assert_eq!(d.len(), 6);
        assert!(d.bytes().all(|b| b.is_ascii_digit()) && !d.starts_with('0'));
        let h = fill(&mut rng, "{h8}", &cx());
        assert!(h.len() == 8 && h.bytes().all(|b| b.is_ascii_hexdigit()));
        let u = fill(&mut rng, "{uuid}", &cx());
        assert_eq!(
            u.split('-').map(str::len).collect::<Vec<_>>(),
            vec![8, 4, 4, 4, 12]
        );
        assert_eq!(fill(&mut rng, "{ts}", &cx()), "2026-03-02T08:00:00.007Z");
        let iso = fill(&mut rng, "{iso}", &cx());
        assert!(
            iso.as_str() < "2026-03-02" && iso.as_str() >= "2026-01-31",
            "{iso}"
        );
    }

    #[test]
    fn typos_touch_only_plain_lowercase_words() {
        let mut rng = SplitMix64::new(3);
        let text = format!(
            "{} order qm482133 at maren.v@mailbox.test from 192.0.2.4 arrived broken",
            v::RETAILER_SHORT
        );
        let text = text.as_str();
        let out = typos(&mut rng, text, 1.0);
        assert!(out.starts_with(&format!("{} ", v::RETAILER_SHORT)), "{out}");
        assert!(
            out.contains("qm482133")
                && out.contains("maren.v@mailbox.test")
                && out.contains("192.0.2.4"),
            "{out}"
        );
        assert_ne!(out, text, "rate 1 changes the plain words");
        assert_eq!(typos(&mut rng, text, 0.0), text);
        // Changed words keep their first and last letter.
        let words: Vec<&str> = out.split(' ').collect();
        let last = words.last().unwrap();
        assert!(last.starts_with('b') && last.ends_with('n'), "{last}");
    }

    #[test]
    fn weighted_choice_follows_weights() {
        let mut rng = SplitMix64::new(4);
        let mut n = [0u32; 3];
        for _ in 0..30_000 {
            n[weighted(&mut rng, &[1.0, 2.0, 7.0])] += 1;
        }
        assert!((n[2] as f64 / 30_000.0 - 0.7).abs() < 0.02, "{n:?}");
        assert!((n[0] as f64 / 30_000.0 - 0.1).abs() < 0.01, "{n:?}");
    }
}
