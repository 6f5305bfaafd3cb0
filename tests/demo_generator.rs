//! The demo generator's promises: byte-identical files per seed, phase shares as scripted, label delays, mistakes and corrections as documented, documented JSON shapes, learnable-but-not-trivial data, and invented names only from the vocabulary file.

use std::collections::{BTreeSet, HashMap};
use std::fs;
use std::path::Path;

use serde_json::Value;
use sieveline::demo::reviewers::{self, CORRECTION_DELAY, CORRECTION_SHARE, LEAD, REVIEWERS};
use sieveline::demo::script::{self, share_of};
use sieveline::demo::{generate, vocabulary, write, DemoConfig, Fields, Generated, Kind, Stream};
use sieveline::eval::cv::{evaluate, train, Example, VocabSpec};
use sieveline::model::NbParams;
use sieveline::settings::Settings;
use sieveline::text::{Analyzer, AnalyzerScratch, TermBag};

fn both(seed: u64, records: usize) -> Generated {
    generate(&DemoConfig::new(
        seed,
        records,
        vec![Kind::Tickets, Kind::Logs],
    ))
}

fn files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                fs::read(&p).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn same_seed_writes_byte_identical_files_and_another_seed_does_not() {
    let (a, b, c) = (
        tempfile::tempdir().unwrap(),
        tempfile::tempdir().unwrap(),
        tempfile::tempdir().unwrap(),
    );
    write::write_streams(&both(7, 3000), a.path(), true).unwrap();
    write::write_streams(&both(7, 3000), b.path(), true).unwrap();
    write::write_streams(&both(8, 3000), c.path(), true).unwrap();
    let (fa, fb, fc) = (files(a.path()), files(b.path()), files(c.path()));
    assert_eq!(
        fa.len(),
        2 * 7 + 1,
        "{:?}",
        fa.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for ((na, da), (nb, db)) in fa.iter().zip(&fb) {
        assert_eq!(na, nb);
        assert!(da == db, "{na} differs between two runs with seed 7");
    }
    for ((na, da), (_, dc)) in fa.iter().zip(&fc) {
        if na != "manifest.json" {
            assert!(da != dc, "{na} is the same for seeds 7 and 8");
        }
    }
}

#[test]
fn phase_boundaries_and_class_shares_follow_the_script() {
    let g = both(11, 20_000);
    for s in &g.streams {
        assert_eq!(
            (s.bounds.phase2_start, s.bounds.phase3_start),
            (8000, 14_000)
        );
        for (i, t) in s.truth.iter().enumerate() {
            assert_eq!(t.phase, s.bounds.phase_of(i));
            assert_eq!(t.id, s.records[i].id);
        }
        for p in 1..=3u8 {
            let phase = script::phase(p);
            let table = match s.kind {
                Kind::Tickets => phase.ticket_shares,
                Kind::Logs => phase.log_shares,
            };
            let range = s.bounds.range(p);
            let n = range.len() as f64;
            for c in s.kind.classes() {
                let got = s.truth[range.clone()]
                    .iter()
                    .filter(|t| t.class == c)
                    .count() as f64
                    / n;
                // Ambiguous log lines draw their class among a few kinds, which moves shares a little.
                let want = share_of(table, c);
                assert!(
                    (got - want).abs() < 0.03,
                    "{:?} phase {p} {c}: {got:.3} vs scripted {want:.3}",
                    s.kind
                );
            }
        }
    }
    let tickets = &g.streams[0];
    let share = |p: u8, tag: &str| {
        let r = tickets.bounds.range(p);
        tickets.truth[r.clone()]
            .iter()
            .filter(|t| t.tags.contains(&tag))
            .count() as f64
            / r.len() as f64
    };
    assert_eq!(
        share(1, "new_line"),
        0.0,
        "the new line launches in phase 2"
    );
    assert!(share(2, "new_line") > 0.2, "{}", share(2, "new_line"));
    assert_eq!(share(1, "outage") + share(2, "outage"), 0.0);
    assert!(share(3, "outage") > 0.1);
    assert!(tickets
        .truth
        .iter()
        .filter(|t| t.tags.contains(&"safety"))
        .all(|t| t.class == "product_defect"));
    assert!(
        share(1, "safety") > 0.005,
        "safety cases exist from day one"
    );
    let logs = &g.streams[1];
    let timeouts = |p: u8| {
        let r = logs.bounds.range(p);
        logs.truth[r.clone()]
            .iter()
            .filter(|t| t.class == "timeout")
            .count() as f64
            / r.len() as f64
    };
    assert!(
        timeouts(3) > 3.0 * timeouts(1),
        "the outage floods timeouts: {} vs {}",
        timeouts(3),
        timeouts(1)
    );
    for (i, t) in logs.truth.iter().enumerate() {
        if t.tags.contains(&"outage") {
            assert!(i >= logs.bounds.phase3_start && t.class == "timeout");
        }
        if t.tags.contains(&"new_service") {
            assert!(i >= logs.bounds.phase2_start);
            assert!(
                matches!(&logs.records[i].fields, Fields::Log { service, .. } if service == vocabulary::NEW_SERVICE)
            );
        }
    }
}

fn check_labels(s: &Stream) {
    let n = s.records.len();
    let delay_of: HashMap<&str, (u64, u64)> = REVIEWERS
        .iter()
        .map(|r| (reviewers::reviewer_name(r.name), r.delay))
        .collect();
    let lead = reviewers::reviewer_name(LEAD);
    let mut first: HashMap<usize, (&str, usize)> = HashMap::new();
    let mut wrong = 0usize;
    let mut last_at = 0;
    for l in &s.labels {
        assert!(l.at >= last_at, "events are ordered by arrival");
        last_at = l.at;
        assert!(
            l.at < n && l.at > l.index,
            "a label arrives after its record and before the end"
        );
        match l.replaces {
            None => {
                let (lo, hi) = delay_of[l.reviewer];
                let d = (l.at - l.index) as u64;
                assert!(
                    lo <= d && d <= hi,
                    "{} took {d} records, range {lo}..={hi}",
                    l.reviewer
                );
                assert!(
                    first.insert(l.index, (l.class, l.at)).is_none(),
                    "record {} labelled twice",
                    l.index
                );
                if l.class != s.truth[l.index].class {
                    wrong += 1;
                }
            }
            Some(old) => {
                assert_eq!(l.reviewer, lead);
                assert_eq!(
                    l.class, s.truth[l.index].class,
                    "a correction carries the true class"
                );
                let (given, at) = first[&l.index];
                assert_eq!(old, given, "replaces names the class first given");
                assert_ne!(old, l.class);
                let d = (l.at - at) as u64;
                assert!(
                    CORRECTION_DELAY.0 <= d && d <= CORRECTION_DELAY.1,
                    "correction after {d}"
                );
            }
        }
    }
    let rate = wrong as f64 / first.len() as f64;
    let want = reviewers::expected_error_rate();
    assert!(
        (rate - want).abs() < 0.015,
        "{:?}: wrong-label rate {rate:.4}, expected {want:.4}",
        s.kind
    );
    // Corrections: of the wrong labels whose correction would fall inside the stream.
    let eligible: Vec<usize> = first
        .iter()
        .filter(|(i, (c, at))| *c != s.truth[**i].class && at + (CORRECTION_DELAY.1 as usize) < n)
        .map(|(i, _)| *i)
        .collect();
    let corrected: BTreeSet<usize> = s
        .labels
        .iter()
        .filter(|l| l.replaces.is_some())
        .map(|l| l.index)
        .collect();
    let share =
        eligible.iter().filter(|i| corrected.contains(i)).count() as f64 / eligible.len() as f64;
    assert!(
        (share - CORRECTION_SHARE).abs() < 0.08,
        "{:?}: correction share {share:.3} of {}",
        s.kind,
        eligible.len()
    );
    // Label share per phase, over records whose slowest label still arrives in time.
    let slowest = REVIEWERS.iter().map(|r| r.delay.1).max().unwrap() as usize;
    for p in 1..=3u8 {
        let r = s.bounds.range(p);
        let r = r.start..r.end.min(n - slowest);
        let got = r.clone().filter(|i| first.contains_key(i)).count() as f64 / r.len() as f64;
        let want = script::phase(p).label_share;
        assert!(
            (got - want).abs() < 0.03,
            "{:?} phase {p}: labelled {got:.3}, scripted {want}",
            s.kind
        );
    }
    println!(
        "{:?}: {} events, {} first labels, wrong {rate:.4}, {} corrections",
        s.kind,
        s.labels.len(),
        first.len(),
        corrected.len()
    );
}

#[test]
fn reviewers_label_late_sometimes_wrongly_and_the_lead_corrects() {
    let g = both(13, 20_000);
    for s in &g.streams {
        check_labels(s);
    }
}

fn read_jsonl(p: &Path) -> Vec<Value> {
    fs::read_to_string(p)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

fn keys(v: &Value) -> Vec<&str> {
    v.as_object()
        .unwrap()
        .keys()
        .map(|k| k.as_str())
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect()
}

#[test]
fn written_files_have_the_documented_shapes() {
    let dir = tempfile::tempdir().unwrap();
    let g = both(5, 1500);
    write::write_streams(&g, dir.path(), true).unwrap();
    let d = dir.path();
    let tickets = read_jsonl(&d.join("tickets.jsonl"));
    let logs = read_jsonl(&d.join("logs.jsonl"));
    assert_eq!(tickets.len(), 1500);
    assert_eq!(keys(&tickets[0]), ["body", "id", "subject", "ts"]);
    assert_eq!(keys(&logs[0]), ["id", "service", "text", "ts"]);
    let raw_line = fs::read_to_string(d.join("tickets.jsonl")).unwrap();
    assert!(
        raw_line.starts_with("{\"id\":\"tk-000000\",\"ts\":\"2026-03-02T08:00:00."),
        "{}",
        &raw_line[..60]
    );
    for (k, records) in [("tickets", &tickets), ("logs", &logs)] {
        let by_id: HashMap<&str, &Value> = records
            .iter()
            .map(|r| (r["id"].as_str().unwrap(), r))
            .collect();
        let truth = read_jsonl(&d.join(format!("{k}.truth.jsonl")));
        assert_eq!(truth.len(), records.len());
        assert_eq!(keys(&truth[0]), ["class", "id", "phase", "tags"]);
        let complete = read_jsonl(&d.join(format!("{k}.labels.jsonl")));
        let raw = read_jsonl(&d.join(format!("{k}.raw-labels.jsonl")));
        assert_eq!(complete.len(), raw.len());
        assert!(
            complete.iter().any(|e| e.get("replaces").is_some()),
            "{k}: some corrections"
        );
        for (c, r) in complete.iter().zip(&raw) {
            let want: &[&str] = if c.get("replaces").is_some() {
                &["at", "class", "fields", "id", "replaces", "reviewer", "ts"]
            } else {
                &["at", "class", "fields", "id", "reviewer", "ts"]
            };
            assert_eq!(keys(c), want);
            assert_eq!(
                keys(r),
                want.iter()
                    .copied()
                    .filter(|k| !matches!(*k, "fields" | "reviewer" | "ts"))
                    .collect::<Vec<_>>()
            );
            assert_eq!(
                (&c["id"], &c["class"], &c["at"], c.get("replaces")),
                (&r["id"], &r["class"], &r["at"], r.get("replaces"))
            );
            // The fields are the record's own, unchanged.
            let rec = by_id[c["id"].as_str().unwrap()];
            // Published just after record `at`, at its time.
            let at = c["at"].as_u64().unwrap() as usize;
            assert_eq!(c["ts"], records[at]["ts"]);
            for (f, v) in c["fields"].as_object().unwrap() {
                assert_eq!(&rec[f], v);
            }
            assert_eq!(
                c["fields"].as_object().unwrap().len() + 2,
                rec.as_object().unwrap().len()
            );
        }
        let labelled: usize = (1..=3)
            .map(|p| read_jsonl(&d.join(format!("{k}.labelled.p{p}.jsonl"))).len())
            .sum();
        assert_eq!(labelled, records.len());
    }
    let m: Value =
        serde_json::from_str(&fs::read_to_string(d.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(m["seed"], 5);
    assert_eq!(m["streams"][0]["boundaries"]["phase2_start"], 600);
    assert_eq!(m["streams"][1]["boundaries"]["phase3_start"], 1050);
    assert_eq!(m["streams"][0]["phases"][1]["start"], 600);
    assert_eq!(m["phases"].as_array().unwrap().len(), 3);
}

/// Train multinomial NB on every record of `train_idx`, report accuracy on `test_idx`.
fn nb_accuracy(s: &Stream, train_idx: &[usize], test_sets: &[Vec<usize>]) -> Vec<f64> {
    let settings = Settings::defaults();
    let analyzer = Analyzer::new(&settings.analyzer).unwrap();
    let classes: Vec<String> = s.kind.classes().iter().map(|c| c.to_string()).collect();
    let mut scratch = AnalyzerScratch::default();
    let examples: Vec<Example> = s
        .records
        .iter()
        .zip(&s.truth)
        .map(|(r, t)| {
            let mut bag = TermBag::new();
            match &r.fields {
                Fields::Ticket { subject, body } => analyzer.analyze_fields(
                    [(subject.as_str(), 2.0), (body.as_str(), 1.0)],
                    &mut scratch,
                    &mut bag,
                ),
                Fields::Log { text, .. } => {
                    analyzer.analyze_fields([(text.as_str(), 1.0)], &mut scratch, &mut bag)
                }
            }
            Example {
                bag,
                label: classes.iter().position(|c| c == t.class).unwrap(),
            }
        })
        .collect();
    let m = &settings.model;
    let vocab = VocabSpec {
        kind: m.vocabulary,
        max: m.max_vocabulary,
        buckets: m.hash_buckets,
    };
    let model = train(
        &examples,
        train_idx.iter().copied(),
        &classes,
        &NbParams::multinomial(1.0),
        &settings.analyzer,
        vocab,
    );
    test_sets
        .iter()
        .map(|t| evaluate(&model, &examples, t.iter().copied()).accuracy())
        .collect()
}

#[test]
fn phase_one_is_learnable_but_not_trivial_and_the_changes_hurt_a_phase_one_model() {
    let g = both(7, 12_000);
    for s in &g.streams {
        let p1: Vec<usize> = s.bounds.range(1).collect();
        let train_idx: Vec<usize> = p1.iter().copied().filter(|i| i % 4 != 0).collect();
        let held: Vec<usize> = p1.iter().copied().filter(|i| i % 4 == 0).collect();
        let acc = nb_accuracy(
            s,
            &train_idx,
            &[
                held,
                s.bounds.range(2).collect(),
                s.bounds.range(3).collect(),
            ],
        );
        println!(
            "{:?}: phase-1 model accuracy on held-out phase 1 {:.4}, phase 2 {:.4}, phase 3 {:.4}",
            s.kind, acc[0], acc[1], acc[2]
        );
        assert!(
            (0.85..=0.975).contains(&acc[0]),
            "{:?} phase 1: {}",
            s.kind,
            acc[0]
        );
        match s.kind {
            Kind::Tickets => assert!(acc[1] < acc[0] - 0.1, "the new line hurts: {acc:?}"),
            Kind::Logs => assert!(acc[2] < acc[0] - 0.1, "the outage hurts: {acc:?}"),
        }
    }
}

/// Words of generated text: runs of two or more ASCII letters with at least one capital.
fn capitalised_words(text: &str) -> impl Iterator<Item = &str> {
    text.split(|c: char| !c.is_ascii_alphabetic())
        .filter(|w| w.len() >= 2 && w.bytes().any(|b| b.is_ascii_uppercase()))
}

#[test]
fn every_capitalised_word_in_generated_text_comes_from_the_vocabulary_file() {
    let vocab: BTreeSet<String> = vocabulary::all_strings()
        .iter()
        .flat_map(|s| s.split(|c: char| !c.is_ascii_alphabetic()))
        .map(|w| w.to_lowercase())
        .collect();
    let g = both(3, 6000);
    let mut seen = BTreeSet::new();
    for s in &g.streams {
        for r in &s.records {
            let texts: Vec<&str> = match &r.fields {
                Fields::Ticket { subject, body } => vec![subject, body],
                Fields::Log { service, text } => vec![service, text],
            };
            for t in texts {
                for w in capitalised_words(t) {
                    // Random capitals of the code formats ({A}) sit next to digits or dashes.
                    let lw = w.to_lowercase();
                    if vocab.contains(&lw) {
                        seen.insert(w.to_string());
                        continue;
                    }
                    let at = t.find(w).unwrap();
                    let before = t[..at].chars().last();
                    let after = t[at + w.len()..].chars().next();
                    let in_code = before.is_some_and(|c| c.is_ascii_digit() || c == '-')
                        || after.is_some_and(|c| c.is_ascii_digit());
                    assert!(in_code, "{w:?} in {t:?} is not a word of vocabulary.rs");
                }
            }
        }
    }
    // The lint really looked at the names.
    for name in ["Quillmoss", "Ashvolt", "Tarnwhistle", "Wrenfold"] {
        assert!(seen.contains(name), "{name} never seen");
    }
    // Proper names are distinct from each other and look invented (no digits, capitalised).
    let names = vocabulary::proper_names();
    assert!(names
        .iter()
        .all(|n| n.chars().next().unwrap().is_uppercase()));
}

#[test]
fn demo_sources_other_than_the_vocabulary_hold_no_capitalised_string_literals() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/demo");
    let mut checked = 0;
    for entry in fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        if path.file_name().unwrap() == "vocabulary.rs"
            || path.extension().map_or(true, |e| e != "rs")
        {
            continue;
        }
        checked += 1;
        let text = fs::read_to_string(&path).unwrap();
        for (n, line) in text.lines().enumerate() {
            let code = line.trim_start();
            if code.starts_with("//") {
                continue;
            }
            // String literals: text between pairs of unescaped double quotes.
            let mut in_str = false;
            let mut lit = String::new();
            let mut prev = ' ';
            for c in code.chars() {
                if c == '"' && prev != '\\' {
                    if in_str {
                        // Rust paths in attributes (`Option::is_none`) are code, not text.
                        let is_path = lit.contains("::") && !lit.contains(' ');
                        let bad: Vec<&str> = if is_path {
                            Vec::new()
                        } else {
                            capitalised_words(&lit).collect()
                        };
                        assert!(bad.is_empty(), "{}:{}: literal {lit:?} has capitalised words {bad:?}; names belong in vocabulary.rs", path.display(), n + 1);
                        lit.clear();
                    }
                    in_str = !in_str;
                } else if in_str {
                    lit.push(c);
                }
                prev = c;
            }
        }
    }
    assert!(checked >= 6, "checked {checked} files");
}

#[test]
fn committed_samples_are_exactly_what_the_generator_writes_for_their_manifest() {
    let samples = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-stream");
    let m: Value =
        serde_json::from_str(&fs::read_to_string(samples.join("manifest.json")).unwrap()).unwrap();
    let kinds: Vec<Kind> = m["streams"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| match s["kind"].as_str().unwrap() {
            "tickets" => Kind::Tickets,
            _ => Kind::Logs,
        })
        .collect();
    let config = DemoConfig {
        phase2_at: m["phase2_at"].as_f64().unwrap(),
        phase3_at: m["phase3_at"].as_f64().unwrap(),
        ..DemoConfig::new(
            m["seed"].as_u64().unwrap(),
            m["records_per_stream"].as_u64().unwrap() as usize,
            kinds,
        )
    };
    let dir = tempfile::tempdir().unwrap();
    let written = write::write_streams(&generate(&config), dir.path(), false).unwrap();
    assert_eq!(written.len(), 9);
    for p in written {
        let name = p.file_name().unwrap();
        let committed = fs::read(samples.join(name))
            .unwrap_or_else(|e| panic!("demo-stream/{}: {e}", name.to_string_lossy()));
        assert!(fs::read(&p).unwrap() == committed, "demo-stream/{} is stale: regenerate with `sieveline generate --seed 7 --records 1500 --out demo-stream/`", name.to_string_lossy());
    }
}

#[test]
fn every_label_event_parses_under_the_learners_contract() {
    use sieveline::learn::event::{IdOnlyLabel, LabelEvent};
    let g = both(9, 3000);
    for s in &g.streams {
        for l in &s.labels {
            let bytes = serde_json::to_vec(&write::complete_event(s, l)).unwrap();
            let e = LabelEvent::parse(&bytes)
                .unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&bytes)));
            assert_eq!(
                (e.id.as_str(), e.class.as_str(), e.replaces.as_deref()),
                (s.records[l.index].id.as_str(), l.class, l.replaces)
            );
            assert_eq!(e.weight, 1.0);
            let fields = e.fields.expect("complete events carry the record's fields");
            assert_eq!(
                serde_json::to_value(&s.records[l.index].fields).unwrap(),
                serde_json::Value::Object(fields)
            );
            let raw = serde_json::to_vec(&write::raw_event(s, l)).unwrap();
            let r = IdOnlyLabel::parse(&raw).unwrap();
            assert_eq!(
                (r.id, r.class.as_str(), r.replaces.as_deref(), r.partition),
                (e.id, l.class, l.replaces, None)
            );
        }
    }
}
