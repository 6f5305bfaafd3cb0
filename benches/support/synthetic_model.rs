//! The synthetic model of the publish bench and its profiling loop: `terms` terms named `term0000000`, … learned once each, 100 a record, classes in rotation, so every run builds the same model.

use sieveline::features::Vocabulary;
use sieveline::model::{Model, NbParams};
use sieveline::settings::{Settings, VocabularyKind};
use sieveline::text::TermBag;

pub fn term_name(i: usize) -> String {
    format!("term{i:07}")
}

/// The model, its term names (by id) and its class names.
pub fn synthetic_model(terms: usize, classes: usize) -> (Model, Vec<String>, Vec<String>) {
    let class_names: Vec<String> = (0..classes).map(|i| format!("class{i:02}")).collect();
    let mut m = Model::new(
        NbParams::multinomial(1.0),
        Settings::defaults().analyzer,
        class_names.clone(),
        Vocabulary::new(VocabularyKind::Interned, 4_000_000, 0),
    )
    .unwrap();
    let names: Vec<String> = (0..terms).map(term_name).collect();
    let mut bag = TermBag::new();
    for (r, chunk) in names.chunks(100).enumerate() {
        bag.clear();
        for t in chunk {
            bag.push(t, 1.0);
        }
        m.learn(&bag, &class_names[r % classes], 1.0).unwrap();
    }
    assert_eq!(m.vocabulary_size(), terms);
    (m, names, class_names)
}
