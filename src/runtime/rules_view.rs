//! The rules serving seam: an immutable `RulesView` (a compiled `RuleSet` and when it was loaded) behind `ArcSwapOption`, beside the model's; a reload publishes a new one, and each record is matched against exactly one set (or none).

use std::path::Path;
use std::sync::Arc;

use arc_swap::ArcSwapOption;
use serde::Serialize;

use crate::rules::{self, RuleSet, RulesError};
use crate::settings::Settings;

/// One compiled rules file as served: never mutated once published.
#[derive(Debug)]
pub struct RulesView {
    pub set: RuleSet,
    /// When this set was loaded (RFC 3339, metadata only).
    pub loaded_at: String,
}

impl RulesView {
    /// Read, validate and compile `path` against the analyzer and input fields of
    /// `settings`: a whole valid set, or the error naming file, line and rule.
    pub fn load(settings: &Settings, path: &Path) -> Result<RulesView, RulesError> {
        Ok(RulesView { set: rules::load_for(settings, path)?, loaded_at: crate::clock::rfc3339_now() })
    }

    /// The rules-info JSON of the admin endpoint.
    pub fn info(&self) -> RulesInfo {
        RulesInfo {
            source: self.set.source().to_string(),
            fingerprint: self.set.fingerprint().to_string(),
            rules: self.set.len(),
            classes: self.set.classes().to_vec(),
            loaded_at: self.loaded_at.clone(),
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct RulesInfo {
    pub source: String,
    /// blake3 of the file text (16 hex digits): tells two loaded versions apart.
    pub fingerprint: String,
    pub rules: usize,
    pub classes: Vec<String>,
    pub loaded_at: String,
}

/// Where scorers read the current rules; `publish` swaps them atomically.
#[derive(Debug, Clone, Default)]
pub struct RulesHandle(Arc<ArcSwapOption<RulesView>>);

impl RulesHandle {
    pub fn new(view: Option<RulesView>) -> RulesHandle {
        RulesHandle(Arc::new(ArcSwapOption::from(view.map(Arc::new))))
    }

    /// The current rules, if any; hold them for the whole of one record.
    pub fn current(&self) -> Option<Arc<RulesView>> {
        self.0.load_full()
    }

    /// Replace the served rules; records already being matched keep the old set.
    pub fn publish(&self, view: RulesView) {
        self.0.store(Some(Arc::new(view)));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_record_keeps_the_set_it_took_while_a_new_one_is_published() {
        let s = Settings::defaults();
        let dir = std::env::temp_dir().join(format!("sieveline-rules-view-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let write = |name: &str, class: &str| {
            let p = dir.join(name);
            std::fs::write(&p, format!("[[rule]]\nid = \"r\"\nclass = \"{class}\"\naction = \"assign\"\n[[rule.when]]\nany = [\"refund\"]\n")).unwrap();
            p
        };
        let handle = RulesHandle::new(None);
        assert!(handle.current().is_none());
        handle.publish(RulesView::load(&s, &write("a.toml", "returns")).unwrap());
        let held = handle.current().unwrap();
        handle.publish(RulesView::load(&s, &write("b.toml", "billing")).unwrap());
        assert_eq!(held.set.rules()[0].class, "returns", "the held set is unchanged");
        assert_eq!(handle.current().unwrap().set.rules()[0].class, "billing");
        assert_ne!(held.info().fingerprint, handle.current().unwrap().info().fingerprint);
        let _ = std::fs::remove_dir_all(&dir);
    }
}
