//! Distances between two class distributions: population stability index (with the usual small-proportion floor) and Jensen–Shannon divergence in bits.
//!
//! Both take proportions (or counts, which are normalised first) over the same
//! classes in the same order.

/// Proportions below this are raised to it before PSI takes logarithms, so an
/// empty class does not make the index infinite. Common practice (from memory)
/// is a floor of about 1e-4 on proportions, applied without renormalising.
pub const DEFAULT_PSI_FLOOR: f64 = 1e-4;

/// `xs / Σ xs`; all zeros (or an empty slice) gives all zeros.
pub fn normalise(xs: &[f64]) -> Vec<f64> {
    let total: f64 = xs.iter().sum();
    if total > 0.0 {
        xs.iter().map(|x| x / total).collect()
    } else {
        vec![0.0; xs.len()]
    }
}

/// Population stability index of `actual` against `expected`:
/// PSI = Σᵢ (aᵢ − eᵢ) · ln(aᵢ / eᵢ), where aᵢ and eᵢ are proportions, each
/// raised to `floor` first (not renormalised). Both inputs are normalised
/// from counts or proportions. `None` when either has no mass or the lengths differ.
pub fn psi(actual: &[f64], expected: &[f64], floor: f64) -> Option<f64> {
    if actual.len() != expected.len() || actual.is_empty() {
        return None;
    }
    let (ta, te): (f64, f64) = (actual.iter().sum(), expected.iter().sum());
    if !(ta > 0.0 && te > 0.0) {
        return None;
    }
    let mut sum = 0.0;
    for (a, e) in actual.iter().zip(expected) {
        let a = (a / ta).max(floor);
        let e = (e / te).max(floor);
        sum += (a - e) * (a / e).ln();
    }
    Some(sum)
}

/// Jensen–Shannon divergence in bits (log base 2), between 0 and 1:
/// JS(p, q) = ½ KL(p ‖ m) + ½ KL(q ‖ m) with m = ½ (p + q), 0 · log 0 = 0.
/// Inputs are normalised first. `None` when either has no mass or the lengths differ.
pub fn js_divergence_bits(p: &[f64], q: &[f64]) -> Option<f64> {
    if p.len() != q.len() || p.is_empty() {
        return None;
    }
    let (tp, tq): (f64, f64) = (p.iter().sum(), q.iter().sum());
    if !(tp > 0.0 && tq > 0.0) {
        return None;
    }
    let mut sum = 0.0;
    for (a, b) in p.iter().zip(q) {
        let (a, b) = (a / tp, b / tq);
        let m = 0.5 * (a + b);
        if a > 0.0 {
            sum += 0.5 * a * (a / m).log2();
        }
        if b > 0.0 {
            sum += 0.5 * b * (b / m).log2();
        }
    }
    // Rounding can leave a hair below zero for identical inputs.
    Some(sum.clamp(0.0, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn psi_hand_computed_example() {
        // Expected (reference) mix 50/30/20, actual 40/40/20:
        //   (0.4−0.5)·ln(0.4/0.5) = −0.1 · −0.2231436 = 0.0223144
        //   (0.4−0.3)·ln(0.4/0.3) =  0.1 ·  0.2876821 = 0.0287682
        //   (0.2−0.2)·ln(1)       =  0
        // PSI = 0.0510826 (worked by hand from the formula in the issue).
        let v = psi(&[40.0, 40.0, 20.0], &[0.5, 0.3, 0.2], DEFAULT_PSI_FLOOR).unwrap();
        assert!((v - 0.051_082_6).abs() < 1e-6, "{v}");
        assert_eq!(psi(&[1.0, 2.0], &[1.0, 2.0], DEFAULT_PSI_FLOOR), Some(0.0));
    }

    #[test]
    fn psi_floor_keeps_an_empty_class_finite() {
        // Actual 100/0, expected 50/50: the empty class is floored at 1e-4.
        //   (1−0.5)·ln(1/0.5) = 0.3465736
        //   (0.0001−0.5)·ln(0.0001/0.5) = −0.4999 · −8.5171932 = 4.2577449
        // PSI = 4.6043185
        let v = psi(&[100.0, 0.0], &[0.5, 0.5], 1e-4).unwrap();
        assert!((v - 4.604_318_5).abs() < 1e-6, "{v}");
        assert!(psi(&[1.0], &[1.0, 2.0], 1e-4).is_none());
        assert!(psi(&[0.0, 0.0], &[1.0, 2.0], 1e-4).is_none());
    }

    #[test]
    fn psi_is_symmetric_in_its_arguments() {
        let (a, b) = ([0.2, 0.5, 0.3], [0.4, 0.4, 0.2]);
        let (x, y) = (psi(&a, &b, 1e-4).unwrap(), psi(&b, &a, 1e-4).unwrap());
        assert!((x - y).abs() < 1e-15);
    }

    #[test]
    fn js_bounds_and_a_hand_computed_value() {
        // Disjoint supports: exactly 1 bit.
        assert!((js_divergence_bits(&[1.0, 0.0], &[0.0, 1.0]).unwrap() - 1.0).abs() < 1e-15);
        assert_eq!(js_divergence_bits(&[3.0, 1.0], &[0.75, 0.25]), Some(0.0));
        // p = (1, 0), q = (½, ½): m = (¾, ¼);
        // ½·1·log2(4/3) + ½(½·log2(⅔) + ½·log2(2)) = 0.2075187 + ½(−0.2924813 + 0.5) = 0.3112781
        let v = js_divergence_bits(&[1.0, 0.0], &[0.5, 0.5]).unwrap();
        assert!((v - 0.311_278_1).abs() < 1e-6, "{v}");
    }

    #[test]
    fn normalise_handles_zero_mass() {
        assert_eq!(normalise(&[1.0, 3.0]), vec![0.25, 0.75]);
        assert_eq!(normalise(&[0.0, 0.0]), vec![0.0, 0.0]);
    }
}
