//! `sieveline demo`: the whole job in one process, with no broker — the seeded scenario's records stream through the real service, rules route them on day one, simulated reviewers' labels teach the model, drift is watched — then accuracy per phase, rules against learned, drift delays and throughput.

use std::collections::{HashMap, VecDeque};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};
use tokio::io::AsyncWriteExt;

use crate::cli::DemoArgs;
use crate::decide::DecidedBy;
use crate::demo::report::{flag_delays, phase_figures, DriftSample, PhaseFigures, Seen};
use crate::demo::{self, DemoConfig, Fields, Kind, Stream};
use crate::io::lines::{LineSink, LineSource};
use crate::io::sink::Sink;
use crate::metrics::Metrics;
use crate::model::snapshot::{self, SnapshotMeta};
use crate::model::Model;
use crate::rules::{self, BlendScratch, Decider, FieldText};
use crate::runtime::label_log::ChannelLabelLog;
use crate::runtime::Service;
use crate::settings::{BlendMode, DriftThresholds, Settings};
use crate::text::Analyzer;

const TICKETS_CONFIG: &str = include_str!("../../demo-stream/config-tickets.toml");
const TICKETS_RULES: &str = include_str!("../../demo-stream/rules-tickets.toml");
const LOGS_CONFIG: &str = include_str!("../../demo-stream/config-logs.toml");
const LOGS_RULES: &str = include_str!("../../demo-stream/rules-logs.toml");

/// Accuracy shown in the progress line is over this many latest decisions.
const LIVE_WINDOW: usize = 500;
/// Drift indicators are read every this many records fed.
const SAMPLE_EVERY: usize = 25;

pub fn run(args: &DemoArgs) -> Result<()> {
    let kinds = match args.stream.as_str() {
        "tickets" => vec![Kind::Tickets],
        "logs" => vec![Kind::Logs],
        "both" => vec![Kind::Tickets, Kind::Logs],
        k => bail!("--stream {k:?}: expected tickets, logs or both"),
    };
    if args.records < 100 {
        bail!("--records {}: need at least 100 records per stream", args.records);
    }
    if !(args.rate > 0.0 && args.rate <= 1_000_000.0) {
        bail!("--rate {}: records per second, above 0", args.rate);
    }
    std::fs::create_dir_all(&args.out).with_context(|| format!("create {}", args.out.display()))?;
    let generated = demo::generate(&DemoConfig::new(args.seed, args.records, kinds));
    let rt = tokio::runtime::Builder::new_multi_thread().enable_all().build().context("tokio runtime")?;
    let reports = rt.block_on(async {
        let mut runs = Vec::new();
        for (n, stream) in generated.streams.iter().enumerate() {
            runs.push(prepare(stream, args, n)?);
        }
        eprintln!(
            "sieveline demo: {} records per stream at {} records/s (seed {}); writing to {}",
            args.records,
            args.rate,
            args.seed,
            args.out.display()
        );
        let progress = tokio::spawn(progress_lines(runs.iter().map(|r| r.live.clone()).collect()));
        let handles: Vec<_> = runs.into_iter().map(|r| tokio::spawn(r.run(args.keep_open))).collect();
        let mut reports = Vec::new();
        for h in handles {
            reports.push(h.await.context("demo stream task")??);
        }
        progress.abort();
        Ok::<_, anyhow::Error>(reports)
    })?;
    rt.shutdown_timeout(Duration::from_millis(200));
    eprintln!();
    for (stream, report) in generated.streams.iter().zip(&reports) {
        print_report(stream, report, args)?;
    }
    Ok(())
}

/// What one stream's run produced.
struct StreamReport {
    seen: Vec<Seen>,
    samples: Vec<DriftSample>,
    labels_given: usize,
    corrections_given: usize,
    elapsed: Duration,
    metrics: Arc<Metrics>,
    final_version: String,
    decisions_path: PathBuf,
    settings: Settings,
}

/// Shared between the decision tap, the feeder and the progress line.
struct Live {
    name: &'static str,
    total: usize,
    fed: AtomicUsize,
    decided: AtomicUsize,
    state: Mutex<LiveState>,
    phase2: usize,
    phase3: usize,
}

#[derive(Default)]
struct LiveState {
    recent: VecDeque<(bool, bool)>,
    seen: Vec<Seen>,
    labels: usize,
    last: Option<DriftSample>,
}

/// One stream ready to run.
struct StreamRun {
    name: &'static str,
    service: Service,
    writer: tokio::io::DuplexStream,
    lines: Vec<Vec<u8>>,
    events: Vec<(usize, Vec<u8>, bool)>,
    labels_tx: std::sync::mpsc::Sender<Vec<u8>>,
    live: Arc<Live>,
    rate: f64,
    decisions_path: PathBuf,
    settings: Settings,
}

fn prepare(stream: &Stream, args: &DemoArgs, n: usize) -> Result<StreamRun> {
    let name = stream.kind.name();
    let (config, rules_text) = match stream.kind {
        Kind::Tickets => (TICKETS_CONFIG, TICKETS_RULES),
        Kind::Logs => (LOGS_CONFIG, LOGS_RULES),
    };
    let rules_path = args.out.join(format!("rules-{name}.toml"));
    std::fs::write(&rules_path, rules_text)?;
    let mut settings = Settings::from_toml_str(config).with_context(|| format!("demo settings for {name}"))?;
    settings.rules.path = rules_path.display().to_string();
    settings.learning.enabled = true;
    settings.snapshot.path = String::new();
    settings.admin.enabled = true;
    settings.admin.bind = match args.admin_port {
        0 => "127.0.0.1:0".to_string(),
        p => format!("127.0.0.1:{}", p + n as u16),
    };
    // A cold start: the model knows the classes and nothing else.
    let mut classes: Vec<String> = stream.kind.classes().iter().map(|c| c.to_string()).collect();
    classes.sort();
    let model = Model::from_settings(&settings, classes)?;
    let base = args.out.join(format!("{name}.base.svm"));
    snapshot::write(&base, &model, &SnapshotMeta::fresh(&model, Some(format!("{name}-cold-start"))))?;
    settings.service.model = base.display().to_string();
    settings.validate().context("demo settings")?;

    let mut service = Service::new(settings.clone()).context("start the demo service")?;
    let (writer, reader) = tokio::io::duplex(1 << 16);
    service.set_line_source(LineSource::from_reader(name, Box::new(tokio::io::BufReader::new(reader))));
    let (labels_tx, log) = ChannelLabelLog::new(&format!("demo.{name}.labels"));
    service.set_label_log(Box::new(log));
    let truth: HashMap<String, &'static str> = stream.truth.iter().map(|t| (t.id.clone(), t.class)).collect();
    let live = Arc::new(Live {
        name,
        total: stream.records.len(),
        fed: AtomicUsize::new(0),
        decided: AtomicUsize::new(0),
        state: Mutex::new(LiveState::default()),
        phase2: stream.bounds.phase2_start,
        phase3: stream.bounds.phase3_start,
    });
    let decisions_path = args.out.join(format!("{name}.decisions.jsonl"));
    let file = std::fs::File::create(&decisions_path).with_context(|| format!("create {}", decisions_path.display()))?;
    let tap = Tap { file: std::io::BufWriter::new(file), buf: Vec::new(), truth, live: live.clone() };
    service.set_sink(Sink::Lines(LineSink::writer(Box::new(tap), true)));

    let lines = stream.records.iter().map(|r| serde_json::to_vec(r).expect("a record serializes")).collect();
    let mut events: Vec<(usize, Vec<u8>, bool)> = stream
        .labels
        .iter()
        .map(|l| {
            let e = demo::write::complete_event(stream, l);
            (l.at, serde_json::to_vec(&e).expect("an event serializes"), l.replaces.is_some())
        })
        .collect();
    events.sort_by_key(|e| e.0);
    Ok(StreamRun {
        name,
        service,
        writer,
        lines,
        events,
        labels_tx,
        live,
        rate: args.rate,
        decisions_path,
        settings,
    })
}

impl StreamRun {
    /// Feed the records at the demo's rate, hand each label to the learner once
    /// the record it is due after has been decided, read the drift indicators,
    /// and let the service finish when the stream ends (or at Ctrl-C with `keep_open`).
    async fn run(self, keep_open: bool) -> Result<StreamReport> {
        let StreamRun { name, service, mut writer, lines, events, labels_tx, live, rate, decisions_path, settings, .. } = self;
        let metrics = service.metrics();
        let model = service.model();
        let shutdown = tokio_util::sync::CancellationToken::new();
        let admin = service.admin_addr();
        let svc = tokio::spawn(service.run(shutdown.clone()));
        for _ in 0..500 {
            if let Some(a) = admin.get() {
                eprintln!("  {name}: status page and metrics at http://{a}/");
                break;
            }
            tokio::time::sleep(Duration::from_millis(10)).await;
        }
        let started = Instant::now();
        let mut samples = Vec::new();
        let (mut next_label, mut given, mut corrections) = (0usize, 0usize, 0usize);
        for (i, line) in lines.iter().enumerate() {
            let due = started + Duration::from_secs_f64(i as f64 / rate);
            tokio::time::sleep_until(due.into()).await;
            writer.write_all(line).await.context("feed the demo pipeline")?;
            writer.write_all(b"\n").await?;
            live.fed.store(i + 1, Ordering::Relaxed);
            let decided = live.decided.load(Ordering::Relaxed);
            while next_label < events.len() && events[next_label].0 < decided {
                let (_, e, corr) = &events[next_label];
                let _ = labels_tx.send(e.clone());
                given += 1;
                corrections += usize::from(*corr);
                next_label += 1;
            }
            live.state.lock().expect("live").labels = given;
            if i % SAMPLE_EVERY == 0 {
                let s = drift_sample(&metrics, &settings.drift.thresholds, i);
                live.state.lock().expect("live").last = Some(s.clone());
                samples.push(s);
            }
        }
        writer.flush().await?;
        // Wait until every record has its output, so the summary sees them all.
        let all = lines.len();
        while live.decided.load(Ordering::Relaxed) < all && !svc.is_finished() {
            tokio::time::sleep(Duration::from_millis(20)).await;
        }
        let elapsed = started.elapsed();
        if keep_open {
            eprintln!("{name}: stream done; the status page stays up until Ctrl-C");
            let _ = tokio::signal::ctrl_c().await;
        }
        drop(writer);
        let report = svc.await.context("service task")?;
        report.context("the demo service stopped")?;
        let seen = std::mem::take(&mut live.state.lock().expect("live").seen);
        Ok(StreamReport {
            seen,
            samples,
            labels_given: given,
            corrections_given: corrections,
            elapsed,
            metrics,
            final_version: model.current().meta.model_version.clone(),
            decisions_path,
            settings,
        })
    }
}

/// Reads the drift indicators the service exports, and whether any of them is
/// past its alert threshold (the same thresholds as deploy/prometheus/alerts.yml).
fn drift_sample(m: &Metrics, t: &DriftThresholds, index: usize) -> DriftSample {
    let d = &m.drift;
    let or0 = |x: f64| if x.is_finite() { x } else { 0.0 };
    let psi = or0(d.class_mix_psi.get());
    let oov_records = or0(d.mostly_unknown_records.get());
    let oov_tokens = or0(d.unknown_tokens.get());
    let change = d.feedback_change_detected.get() == 1;
    let flagged = psi > t.psi_moderate || oov_tokens > t.oov_token_ratio || oov_records > t.oov_record_ratio || change;
    DriftSample { index, psi, oov_records, oov_tokens, feedback_accuracy: or0(d.feedback_accuracy.get()), change, flagged }
}

/// The sink's writer: every output line goes to the decisions file and is read
/// back for the live figures.
struct Tap {
    file: std::io::BufWriter<std::fs::File>,
    buf: Vec<u8>,
    truth: HashMap<String, &'static str>,
    live: Arc<Live>,
}

impl Write for Tap {
    fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
        self.file.write_all(b)?;
        self.buf.extend_from_slice(b);
        while let Some(pos) = self.buf.iter().position(|c| *c == b'\n') {
            let line: Vec<u8> = self.buf.drain(..=pos).collect();
            self.observe(&line);
        }
        Ok(b.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.file.flush()
    }
}

impl Tap {
    fn observe(&mut self, line: &[u8]) {
        let Ok(v) = serde_json::from_slice::<serde_json::Value>(line) else { return };
        let kind = v["kind"].as_str().unwrap_or("");
        if kind != "decision" && kind != "review" {
            return;
        }
        let (Some(id), Some(class)) = (v["id"].as_str(), v["class"].as_str()) else { return };
        let right = self.truth.get(id).is_some_and(|t| *t == class);
        let reviewed = kind == "review";
        let mut st = self.live.state.lock().expect("live");
        st.recent.push_back((right, reviewed));
        if st.recent.len() > LIVE_WINDOW {
            st.recent.pop_front();
        }
        st.seen.push(Seen {
            id: id.to_string(),
            class: class.to_string(),
            reviewed,
            decided_by: v["decided_by"].as_str().unwrap_or("").to_string(),
        });
        drop(st);
        self.live.decided.fetch_add(1, Ordering::Relaxed);
    }
}

/// One progress line a second, for every stream.
async fn progress_lines(lives: Vec<Arc<Live>>) {
    let started = Instant::now();
    let mut tick = tokio::time::interval(Duration::from_secs(1));
    tick.tick().await;
    loop {
        tick.tick().await;
        let parts: Vec<String> = lives
            .iter()
            .map(|l| {
                let fed = l.fed.load(Ordering::Relaxed);
                let phase = if fed >= l.phase3 { 3 } else if fed >= l.phase2 { 2 } else { 1 };
                let st = l.state.lock().expect("live");
                let n = st.recent.len().max(1) as f64;
                let acc = st.recent.iter().filter(|r| r.0).count() as f64 / n;
                let rev = st.recent.iter().filter(|r| r.1).count() as f64 / n;
                let (psi, oov, flag) = st.last.as_ref().map_or((0.0, 0.0, false), |s| (s.psi, s.oov_tokens, s.flagged));
                format!(
                    "{} {}/{} phase {} acc {:.2} review {:.0}% labels {} psi {:.2} unknown {:.1}%{}",
                    l.name,
                    l.decided.load(Ordering::Relaxed),
                    l.total,
                    phase,
                    acc,
                    rev * 100.0,
                    st.labels,
                    psi,
                    oov * 100.0,
                    if flag { " DRIFT" } else { "" }
                )
            })
            .collect();
        eprintln!("[{:5.1}s] {}", started.elapsed().as_secs_f64(), parts.join(" | "));
    }
}

/// The class the hand-written rules alone give each record (no model).
fn rules_alone(stream: &Stream, settings: &Settings) -> Result<Vec<Option<String>>> {
    let analyzer = Analyzer::new(&settings.analyzer)?;
    let set = rules::load(Path::new(&settings.rules.path), &analyzer, &rules::field_names(settings))?;
    let decider = Decider { blend: BlendMode::RulesOnly, ..Decider::from_settings(settings) };
    let mut scratch = BlendScratch::default();
    Ok(stream
        .records
        .iter()
        .map(|r| {
            let named = |name: &str| -> Option<&str> {
                match (&r.fields, name) {
                    (Fields::Ticket { subject, .. }, "subject") => Some(subject),
                    (Fields::Ticket { body, .. }, "body") => Some(body),
                    (Fields::Log { service, .. }, "service") => Some(service),
                    (Fields::Log { text, .. }, "text") => Some(text),
                    _ => None,
                }
            };
            let fields: Vec<FieldText> = settings
                .input
                .fields
                .iter()
                .enumerate()
                .filter_map(|(i, f)| named(&f.name).map(|text| FieldText { field: i, text, weight: f.weight }))
                .collect();
            let d = decider.decide(&analyzer, Some(&set), None, "", None, &fields, &mut scratch);
            matches!(d.decided_by, DecidedBy::Rule(_)).then_some(d.class)
        })
        .collect())
}

fn print_report(stream: &Stream, r: &StreamReport, args: &DemoArgs) -> Result<()> {
    let alone = rules_alone(stream, &r.settings)?;
    let figures = phase_figures(&stream.truth, &stream.bounds, &r.seen, |i| alone[i].clone());
    let m = &r.metrics;
    let secs = r.elapsed.as_secs_f64();
    let scoring = m.scoring_latency.get_sample_sum() / (m.scoring_latency.get_sample_count().max(1) as f64);
    println!(
        "{}: {} records in {:.1} s ({:.0} records/s, paced by --rate {}); the pipeline's own cost {:.1} µs a record (≈ {:.0} records/s on one core)",
        stream.kind.name(),
        r.seen.len(),
        secs,
        r.seen.len() as f64 / secs,
        args.rate,
        scoring * 1e6,
        1.0 / scoring.max(1e-9)
    );
    println!("  phase          records  accuracy  2nd half  review  by model  rules alone (coverage)");
    let names = ["steady", "new line", "outage"];
    for f in &figures {
        println!(
            "  {} {:<10} {:>7}  {:>8.3}  {:>8.3}  {:>5.1}%  {:>7.0}%  {:.3} ({:.2})",
            f.phase,
            names[f.phase as usize - 1],
            f.records,
            f.accuracy,
            f.accuracy_second_half,
            f.review_rate * 100.0,
            f.model_share * 100.0,
            f.rules_only_accuracy,
            f.rules_only_coverage
        );
    }
    let learned = m.labels_learned.get();
    println!(
        "  labels: {} given by the simulated reviewers ({} corrections), {} learned; served model {}",
        r.labels_given, r.corrections_given, learned, r.final_version
    );
    let delays: Vec<String> = flag_delays(&r.samples, &stream.bounds)
        .into_iter()
        .map(|(p, d)| match d {
            Some(n) => format!("phase {p} flagged {n} records after it began"),
            None => format!("phase {p} not flagged"),
        })
        .collect();
    println!("  drift: {}", delays.join("; "));
    write_summary(stream, r, &figures, args)?;
    Ok(())
}

/// The figures as JSON beside the decisions, for tools (the test recomputes its own).
fn write_summary(stream: &Stream, r: &StreamReport, figures: &[PhaseFigures], args: &DemoArgs) -> Result<()> {
    let path = args.out.join(format!("{}.summary.json", stream.kind.name()));
    let v = serde_json::json!({
        "stream": stream.kind.name(),
        "records": r.seen.len(),
        "phases": figures,
        "boundaries": [stream.bounds.phase2_start, stream.bounds.phase3_start],
        "drift_samples": r.samples,
        "flag_delays": flag_delays(&r.samples, &stream.bounds),
        "labels_given": r.labels_given,
        "model_version": r.final_version,
        "decisions": r.decisions_path,
    });
    std::fs::write(&path, serde_json::to_vec_pretty(&v)?)?;
    Ok(())
}
