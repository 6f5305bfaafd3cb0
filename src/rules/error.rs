//! Typed errors of the rules file: every problem names the file, the line, the rule id (when known) and what is wrong.

use std::fmt;

use thiserror::Error;

/// One thing wrong with a rules file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// 1-based line number in the file.
    pub line: usize,
    /// The id of the rule the problem is in, when it is in one and the id is known.
    pub rule: Option<String>,
    pub message: String,
}

impl Problem {
    /// `file:line: rule "id": message`, the usual compiler-style location prefix.
    pub fn render(&self, path: &str) -> String {
        match &self.rule {
            Some(id) => format!("{path}:{}: rule {id:?}: {}", self.line, self.message),
            None => format!("{path}:{}: {}", self.line, self.message),
        }
    }
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.rule {
            Some(id) => write!(f, "line {}: rule {id:?}: {}", self.line, self.message),
            None => write!(f, "line {}: {}", self.line, self.message),
        }
    }
}

/// A rules file was refused. A refused file never yields a partial rule set.
#[derive(Debug, Clone, Error, PartialEq, Eq)]
pub enum RulesError {
    #[error("cannot read rules file {path}: {reason}")]
    Read { path: String, reason: String },
    #[error("{}", show_invalid(path, problems))]
    Invalid { path: String, problems: Vec<Problem> },
}

impl RulesError {
    /// The problems found, empty for a read error.
    pub fn problems(&self) -> &[Problem] {
        match self {
            RulesError::Read { .. } => &[],
            RulesError::Invalid { problems, .. } => problems,
        }
    }
}

fn show_invalid(path: &str, problems: &[Problem]) -> String {
    match problems {
        [one] => one.render(path),
        many => {
            let mut s = format!("rules file {path} has {} problems:", many.len());
            for p in many {
                s.push_str("\n  ");
                s.push_str(&p.render(path));
            }
            s
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_problem_reads_as_file_line_rule_message() {
        let e = RulesError::Invalid {
            path: "r.toml".into(),
            problems: vec![Problem { line: 7, rule: Some("refund".into()), message: "bad".into() }],
        };
        assert_eq!(e.to_string(), "r.toml:7: rule \"refund\": bad");
        assert_eq!(e.problems().len(), 1);
    }

    #[test]
    fn several_problems_are_listed_each_with_the_file() {
        let p = |line| Problem { line, rule: None, message: "x".into() };
        let e = RulesError::Invalid { path: "r.toml".into(), problems: vec![p(1), p(2)] };
        let s = e.to_string();
        assert!(s.starts_with("rules file r.toml has 2 problems:"), "{s}");
        assert!(s.contains("r.toml:1: x") && s.contains("r.toml:2: x"), "{s}");
    }
}
