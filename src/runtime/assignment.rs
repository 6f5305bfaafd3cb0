//! The source partitions this replica owns right now, kept by the consumer's rebalance callbacks and shown on the admin endpoint (`GET /assignment`) and in one log line per change.

use std::collections::{BTreeMap, BTreeSet};
use std::sync::Mutex;

use serde::Serialize;

/// Owned partitions per topic, and how many assignment changes this replica has seen.
#[derive(Debug, Default)]
pub struct Assignment {
    inner: Mutex<Owned>,
}

#[derive(Debug, Default, Clone)]
struct Owned {
    partitions: BTreeMap<String, BTreeSet<i32>>,
    changes: u64,
}

/// What `GET /assignment` answers.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct AssignmentView {
    /// Topic → owned partitions, ascending.
    pub partitions: BTreeMap<String, Vec<i32>>,
    /// Owned partitions over all topics.
    pub count: usize,
    /// Assign and revoke events seen since start (a rebalance is usually one of each).
    pub changes: u64,
}

impl Assignment {
    /// Partitions handed to this replica (eager assign, or an incremental addition).
    pub fn add<'a>(&self, parts: impl IntoIterator<Item = (&'a str, i32)>) {
        let mut o = self.inner.lock().expect("assignment lock");
        for (t, p) in parts {
            o.partitions.entry(t.to_string()).or_default().insert(p);
        }
        o.changes += 1;
    }

    /// Partitions taken away (revoke, or lost after a session timeout).
    pub fn remove<'a>(&self, parts: impl IntoIterator<Item = (&'a str, i32)>) {
        let mut o = self.inner.lock().expect("assignment lock");
        for (t, p) in parts {
            if let Some(set) = o.partitions.get_mut(t) {
                set.remove(&p);
                if set.is_empty() {
                    o.partitions.remove(t);
                }
            }
        }
        o.changes += 1;
    }

    pub fn view(&self) -> AssignmentView {
        let o = self.inner.lock().expect("assignment lock").clone();
        let count = o.partitions.values().map(BTreeSet::len).sum();
        AssignmentView {
            partitions: o.partitions.into_iter().map(|(t, s)| (t, s.into_iter().collect())).collect(),
            count,
            changes: o.changes,
        }
    }

    /// One line for the log, e.g. `tickets.in[0,1,2] (3 partitions)`.
    pub fn describe(&self) -> String {
        let v = self.view();
        if v.count == 0 {
            return "no partitions".into();
        }
        let parts: Vec<String> = v
            .partitions
            .iter()
            .map(|(t, ps)| format!("{t}[{}]", ps.iter().map(i32::to_string).collect::<Vec<_>>().join(",")))
            .collect();
        format!("{} ({} partitions)", parts.join(" "), v.count)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn assign_and_revoke_keep_the_owned_set() {
        let a = Assignment::default();
        assert_eq!(a.describe(), "no partitions");
        a.add([("in", 3), ("in", 0), ("other", 1)]);
        a.remove([("other", 1), ("never", 9)]);
        let v = a.view();
        assert_eq!(v.partitions, BTreeMap::from([("in".to_string(), vec![0, 3])]));
        assert_eq!(v.count, 2);
        assert_eq!(v.changes, 2);
        assert_eq!(a.describe(), "in[0,3] (2 partitions)");
        a.remove([("in", 0), ("in", 3)]);
        assert_eq!(a.view().count, 0);
        assert!(a.view().partitions.is_empty());
    }
}
