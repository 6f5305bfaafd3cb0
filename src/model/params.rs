//! Checked Naive Bayes hyper-parameters: model kind, Lidstone α and the prior rule.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::settings::{ModelKind, ModelSettings, PriorKind};

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NbParams {
    pub kind: ModelKind,
    pub alpha: f64,
    pub priors: PriorKind,
    #[serde(default)]
    pub given_priors: BTreeMap<String, f64>,
}

impl NbParams {
    /// From validated settings.
    pub fn from_settings(m: &ModelSettings) -> NbParams {
        NbParams { kind: m.kind, alpha: m.alpha, priors: m.priors, given_priors: m.given_priors.clone() }
    }

    pub fn multinomial(alpha: f64) -> NbParams {
        NbParams { kind: ModelKind::Multinomial, alpha, priors: PriorKind::Learned, given_priors: BTreeMap::new() }
    }

    pub fn with_alpha(&self, alpha: f64) -> NbParams {
        NbParams { alpha, ..self.clone() }
    }
}
