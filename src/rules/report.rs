//! Per-rule reports on a labelled file: how often each rule fires, its precision and its share of each class; conflicts between classes; coverage, with examples.

use std::collections::BTreeMap;
use std::fmt::Write;

use serde::Serialize;

use super::ruleset::{Action, RuleSet};

/// One rule's record on the file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RuleStats {
    pub id: String,
    pub class: String,
    pub action: &'static str,
    pub guard: bool,
    pub priority: i32,
    /// Records the rule fires on.
    pub fires: u64,
    /// Of those, records labelled with the rule's class.
    pub correct: u64,
    /// correct / fires; `None` when it never fires.
    pub precision: Option<f64>,
    /// Labels of the records it fires on, most frequent first: (class, records, share).
    pub classes: Vec<ClassShare>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassShare {
    pub class: String,
    pub records: u64,
    pub share: f64,
}

/// A record quoted in a report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Example {
    pub line: u64,
    pub label: String,
    pub text: String,
    /// Rules that fired, in precedence order.
    pub rules: Vec<String>,
}

/// Records on which rules for different classes fire.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Conflicts {
    pub records: u64,
    /// (class a, class b) → records, a < b, most frequent first.
    pub pairs: Vec<(String, String, u64)>,
    pub examples: Vec<Example>,
}

/// Records no rule touches.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Coverage {
    pub records: u64,
    /// Records at least one rule fires on.
    pub touched: u64,
    pub untouched: u64,
    pub untouched_share: f64,
    pub examples: Vec<Example>,
}

/// What the rules decide alone (as in blend mode `rules_only`): the first
/// fired assign rule in precedence order names the class.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Decided {
    pub records: u64,
    pub decided: u64,
    pub correct: u64,
    /// correct / decided.
    pub precision: Option<f64>,
    /// decided / records.
    pub coverage: f64,
    /// Per target class: records with that label, and the share a rule assigned to it (recall).
    pub recall: Vec<(String, u64, f64)>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TestReport {
    pub source: String,
    pub records: u64,
    pub rules: Vec<RuleStats>,
    pub decided: Decided,
    pub conflicts: Conflicts,
    pub coverage: Coverage,
}

/// Collects records one at a time; `finish` makes the report.
#[derive(Debug)]
pub struct ReportBuilder<'a> {
    set: &'a RuleSet,
    max_examples: usize,
    records: u64,
    fires: Vec<u64>,
    labels: Vec<BTreeMap<String, u64>>,
    decided: u64,
    decided_correct: u64,
    label_totals: BTreeMap<String, u64>,
    assigned_right: BTreeMap<String, u64>,
    conflicts: u64,
    pairs: BTreeMap<(String, String), u64>,
    conflict_examples: Vec<Example>,
    touched: u64,
    untouched_examples: Vec<Example>,
}

impl<'a> ReportBuilder<'a> {
    pub fn new(set: &'a RuleSet, max_examples: usize) -> Self {
        ReportBuilder {
            set,
            max_examples,
            records: 0,
            fires: vec![0; set.len()],
            labels: vec![BTreeMap::new(); set.len()],
            decided: 0,
            decided_correct: 0,
            label_totals: BTreeMap::new(),
            assigned_right: BTreeMap::new(),
            conflicts: 0,
            pairs: BTreeMap::new(),
            conflict_examples: Vec::new(),
            touched: 0,
            untouched_examples: Vec::new(),
        }
    }

    /// One labelled record and the rules that fired on it (precedence order).
    pub fn add(&mut self, line: u64, label: &str, text: &str, fired: &[u32]) {
        self.records += 1;
        *self.label_totals.entry(label.to_string()).or_default() += 1;
        for &r in fired {
            self.fires[r as usize] += 1;
            *self.labels[r as usize].entry(label.to_string()).or_default() += 1;
        }
        let example = || Example {
            line,
            label: label.to_string(),
            text: preview(text),
            rules: fired.iter().map(|&r| self.set.rule(r).id.clone()).collect(),
        };
        if fired.is_empty() {
            if self.untouched_examples.len() < self.max_examples {
                self.untouched_examples.push(example());
            }
        } else {
            self.touched += 1;
        }
        if let Some(&r) = fired.iter().find(|&&r| self.set.rule(r).action == Action::Assign) {
            self.decided += 1;
            let class = &self.set.rule(r).class;
            if class == label {
                self.decided_correct += 1;
                *self.assigned_right.entry(label.to_string()).or_default() += 1;
            }
        }
        let mut classes: Vec<&str> = fired.iter().map(|&r| self.set.rule(r).class.as_str()).collect();
        classes.sort_unstable();
        classes.dedup();
        if classes.len() > 1 {
            self.conflicts += 1;
            for i in 0..classes.len() {
                for j in i + 1..classes.len() {
                    *self.pairs.entry((classes[i].to_string(), classes[j].to_string())).or_default() += 1;
                }
            }
            if self.conflict_examples.len() < self.max_examples {
                self.conflict_examples.push(example());
            }
        }
    }

    pub fn finish(self) -> TestReport {
        let set = self.set;
        let rules = set
            .rules()
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let fires = self.fires[i];
                let correct = self.labels[i].get(&r.class).copied().unwrap_or(0);
                let mut classes: Vec<ClassShare> = self.labels[i]
                    .iter()
                    .map(|(c, &n)| ClassShare { class: c.clone(), records: n, share: n as f64 / fires.max(1) as f64 })
                    .collect();
                classes.sort_by(|a, b| b.records.cmp(&a.records).then(a.class.cmp(&b.class)));
                RuleStats {
                    id: r.id.clone(),
                    class: r.class.clone(),
                    action: r.action.name(),
                    guard: r.guard,
                    priority: r.priority,
                    fires,
                    correct,
                    precision: (fires > 0).then(|| correct as f64 / fires as f64),
                    classes,
                }
            })
            .collect();
        let recall = set
            .classes()
            .iter()
            .map(|c| {
                let n = self.label_totals.get(c).copied().unwrap_or(0);
                let right = self.assigned_right.get(c).copied().unwrap_or(0);
                (c.clone(), n, if n == 0 { 0.0 } else { right as f64 / n as f64 })
            })
            .collect();
        let mut pairs: Vec<(String, String, u64)> = self.pairs.into_iter().map(|((a, b), n)| (a, b, n)).collect();
        pairs.sort_by(|x, y| y.2.cmp(&x.2).then(x.0.cmp(&y.0)).then(x.1.cmp(&y.1)));
        let n = self.records;
        TestReport {
            source: set.source().to_string(),
            records: n,
            rules,
            decided: Decided {
                records: n,
                decided: self.decided,
                correct: self.decided_correct,
                precision: (self.decided > 0).then(|| self.decided_correct as f64 / self.decided as f64),
                coverage: ratio(self.decided, n),
                recall,
            },
            conflicts: Conflicts { records: self.conflicts, pairs, examples: self.conflict_examples },
            coverage: Coverage {
                records: n,
                touched: self.touched,
                untouched: n - self.touched,
                untouched_share: ratio(n - self.touched, n),
                examples: self.untouched_examples,
            },
        }
    }
}

fn ratio(a: u64, b: u64) -> f64 {
    if b == 0 {
        0.0
    } else {
        a as f64 / b as f64
    }
}

/// The first 100 characters of a text on one line.
pub fn preview(text: &str) -> String {
    let one: String = text.split_whitespace().collect::<Vec<_>>().join(" ");
    if one.chars().count() > 100 {
        format!("{}…", one.chars().take(100).collect::<String>())
    } else {
        one
    }
}

fn pct(x: Option<f64>) -> String {
    x.map(|v| format!("{:.1}%", v * 100.0)).unwrap_or_else(|| "-".into())
}

/// The report as aligned tables for people.
pub fn table(r: &TestReport) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "rules {} on {} records\n", r.source, r.records);
    let wid = r.rules.iter().map(|x| x.id.len()).max().unwrap_or(4).max(4);
    let wc = r.rules.iter().map(|x| x.class.len()).max().unwrap_or(5).max(5);
    let _ = writeln!(
        s,
        "{:<wid$}  {:<6}  {:<wc$}  {:>6}  {:>9}  labels of the records it fires on",
        "rule", "action", "class", "fires", "precision"
    );
    for x in &r.rules {
        let shares: Vec<String> =
            x.classes.iter().take(3).map(|c| format!("{} {:.0}%", c.class, c.share * 100.0)).collect();
        let more = if x.classes.len() > 3 { format!(", +{} more", x.classes.len() - 3) } else { String::new() };
        let action = if x.guard { format!("{}!", x.action) } else { x.action.to_string() };
        let _ = writeln!(
            s,
            "{:<wid$}  {:<7}  {:<wc$}  {:>6}  {:>9}  {}{}",
            x.id,
            action,
            x.class,
            x.fires,
            pct(x.precision),
            shares.join(", "),
            more
        );
    }
    let _ = writeln!(s, "(! marks a guard)\n");
    let d = &r.decided;
    let _ = writeln!(
        s,
        "rules alone (first fired assign rule decides): {} of {} records decided ({}), precision {} ({} correct)",
        d.decided,
        d.records,
        pct(Some(d.coverage)),
        pct(d.precision),
        d.correct
    );
    let _ = writeln!(s, "recall per target class:");
    for (c, n, rec) in &d.recall {
        let _ = writeln!(s, "  {:<wc$}  {:>6} records  {:>6} assigned correctly", c, n, pct(Some(*rec)));
    }
    let c = &r.coverage;
    let _ = writeln!(
        s,
        "\ncoverage: {} records touched by some rule, {} untouched ({})",
        c.touched,
        c.untouched,
        pct(Some(c.untouched_share))
    );
    for e in &c.examples {
        let _ = writeln!(s, "  line {:>6}  [{}] {}", e.line, e.label, e.text);
    }
    let k = &r.conflicts;
    let _ = writeln!(s, "\nconflicts: {} records where rules for different classes fire", k.records);
    for (a, b, n) in k.pairs.iter().take(10) {
        let _ = writeln!(s, "  {n:>6}  {a} / {b}");
    }
    for e in &k.examples {
        let _ = writeln!(s, "  line {:>6}  [{}] {}  <- {}", e.line, e.label, e.text, e.rules.join(", "));
    }
    s
}
