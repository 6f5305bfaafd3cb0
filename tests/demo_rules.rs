//! The demo's starter configs and rules: they load through the real settings and rules code, and the safety guard sends nearly every hazard ticket to review.

use std::path::Path;

use sieveline::demo::{generate, DemoConfig, Fields, Kind};
use sieveline::rules::{self, Action, FieldText, MatchScratch, RecordTerms};
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch};

fn demo_settings(name: &str) -> Settings {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let s = Settings::load(Some(&root.join("demo-stream").join(name)))
        .unwrap_or_else(|e| panic!("{name}: {e}"));
    assert!(
        s.rules.path.starts_with("demo-stream/"),
        "{name}: rules.path {:?}",
        s.rules.path
    );
    s
}

#[test]
fn both_demo_configs_load_with_valid_rules_for_every_class() {
    for (config, kind) in [
        ("config-tickets.toml", Kind::Tickets),
        ("config-logs.toml", Kind::Logs),
    ] {
        let s = demo_settings(config);
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        let set = rules::load_for(&s, &root.join(&s.rules.path))
            .unwrap_or_else(|e| panic!("{config}: {e}"));
        let mut classes: Vec<String> = set.rules().iter().map(|r| r.class.clone()).collect();
        classes.sort();
        classes.dedup();
        let mut want: Vec<String> = kind.classes().iter().map(|c| c.to_string()).collect();
        want.sort();
        assert_eq!(
            classes, want,
            "{config}: every class has at least one rule, and no rule names an unknown class"
        );
    }
}

#[test]
fn the_safety_guard_sends_hazard_tickets_to_review() {
    let s = demo_settings("config-tickets.toml");
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let set = rules::load_for(&s, &root.join(&s.rules.path)).unwrap();
    let guard = set
        .rules()
        .iter()
        .position(|r| r.id == "safety-hazard")
        .expect("a safety guard rule") as u32;
    let r = set.rule(guard);
    assert!(
        r.guard && r.action == Action::Review && r.class == "product_defect",
        "{r:?}"
    );

    let analyzer = Analyzer::new(&s.analyzer).unwrap();
    let fields = rules::field_names(&s);
    let (subject_at, body_at) = (
        fields.iter().position(|f| f == "subject").unwrap(),
        fields.iter().position(|f| f == "body").unwrap(),
    );
    let g = generate(&DemoConfig::new(21, 12_000, vec![Kind::Tickets]));
    let st = &g.streams[0];
    let (mut terms, mut scratch, mut ms) = (
        RecordTerms::new(),
        AnalyzerScratch::default(),
        MatchScratch::default(),
    );
    let (mut hazards, mut caught, mut others, mut others_fired) = (0u32, 0u32, 0u32, 0u32);
    for (rec, truth) in st.records.iter().zip(&st.truth) {
        let Fields::Ticket { subject, body } = &rec.fields else {
            unreachable!()
        };
        let texts = [
            FieldText {
                field: subject_at,
                text: subject,
                weight: 2.0,
            },
            FieldText {
                field: body_at,
                text: body,
                weight: 1.0,
            },
        ];
        terms.analyze(&analyzer, &texts, &mut scratch);
        let fired = set.matches(&terms, &texts, &mut ms).contains(&guard);
        if truth.tags.contains(&"safety") {
            hazards += 1;
            caught += fired as u32;
        } else {
            others += 1;
            others_fired += fired as u32;
        }
    }
    let recall = caught as f64 / hazards as f64;
    let false_alarms = others_fired as f64 / others as f64;
    println!("safety guard: {caught} of {hazards} hazard tickets ({recall:.3}); fires on {false_alarms:.3} of the others");
    // Typos can hide a hazard word; a guard still catches the great majority.
    assert!(hazards > 200 && recall >= 0.95, "{caught} of {hazards}");
    // Erring towards review is the safe side, but the guard must not swamp reviewers.
    assert!(false_alarms < 0.05, "{false_alarms}");
}
