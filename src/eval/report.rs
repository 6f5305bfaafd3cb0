//! Human-readable reports: aligned tables of per-class metrics, confusion matrices and tuning results.

use std::fmt::Write;

use super::cv::CandidateResult;
use super::metrics::Metrics;

/// Per-class precision/recall/F1 with accuracy and macro-F1 underneath.
pub fn metrics_table(m: &Metrics) -> String {
    let w = m.classes.iter().map(|c| c.len()).max().unwrap_or(5).max(5);
    let mut s = String::new();
    let _ = writeln!(s, "{:<w$}  {:>9}  {:>9}  {:>9}  {:>7}", "class", "precision", "recall", "f1", "support");
    for c in &m.per_class {
        let _ = writeln!(s, "{:<w$}  {:>9.4}  {:>9.4}  {:>9.4}  {:>7}", c.class, c.precision, c.recall, c.f1, c.support);
    }
    let _ = writeln!(s, "{:<w$}  {:>9}  {:>9}  {:>9.4}  {:>7}", "macro-F1", "", "", m.macro_f1, m.n);
    let _ = writeln!(s, "{:<w$}  {:>9}  {:>9}  {:>9.4}  {:>7}", "accuracy", "", "", m.accuracy, m.n);
    s
}

/// The confusion matrix, rows true, columns predicted; class names abbreviated by index past 12 classes.
pub fn confusion_table(m: &Metrics) -> String {
    let k = m.classes.len();
    let mut s = String::new();
    let short = k > 12;
    let w = if short { 3 } else { m.classes.iter().map(|c| c.len()).max().unwrap_or(1) };
    let cell = m.confusion.iter().flatten().map(|v| v.to_string().len()).max().unwrap_or(1).max(if short { 3 } else { w });
    let _ = write!(s, "{:<w$}", "true\\pred", w = w.max(9));
    for (i, c) in m.classes.iter().enumerate() {
        let name = if short { i.to_string() } else { c.clone() };
        let _ = write!(s, " {:>cell$}", name);
    }
    s.push('\n');
    for (i, row) in m.confusion.iter().enumerate() {
        let name = if short { i.to_string() } else { m.classes[i].clone() };
        let _ = write!(s, "{:<w$}", name, w = w.max(9));
        for v in row {
            let _ = write!(s, " {:>cell$}", v);
        }
        s.push('\n');
    }
    if short {
        for (i, c) in m.classes.iter().enumerate() {
            let _ = writeln!(s, "  {i:>3} = {c}");
        }
    }
    s
}

/// One line per tuning candidate, the chosen one marked.
pub fn tuning_table(results: &[CandidateResult], chosen: usize) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "  {:<12} {:>8} {:>14} {:>10} {:>14}", "kind", "alpha", "mean accuracy", "std", "mean macro-F1");
    for (i, r) in results.iter().enumerate() {
        let mark = if i == chosen { "*" } else { " " };
        let _ = writeln!(
            s,
            "{mark} {:<12} {:>8} {:>14.4} {:>10.4} {:>14.4}",
            format!("{:?}", r.kind).to_lowercase(),
            r.alpha,
            r.mean_accuracy,
            r.std_accuracy,
            r.mean_macro_f1
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::Confusion;

    #[test]
    fn tables_are_aligned() {
        let classes: Vec<String> = vec!["billing".into(), "shipping".into()];
        let mut c = Confusion::new(2);
        c.add(0, 0);
        c.add(1, 0);
        c.add(1, 1);
        let m = c.metrics(&classes);
        let t = metrics_table(&m);
        let lines: Vec<&str> = t.lines().collect();
        assert_eq!(lines.len(), 5);
        assert!(lines.iter().all(|l| l.len() == lines[0].len()), "{t}");
        assert!(t.contains("0.6667"));
        let ct = confusion_table(&m);
        assert!(ct.lines().nth(2).unwrap().ends_with("1        1"), "{ct}");
    }
}
