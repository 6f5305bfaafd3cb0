//! `sieveline bench-stream`: end-to-end records/s of the service through a Kafka broker beside a pass-through consumer → producer (same client settings, no scoring, same-size outputs) in the same run, and end-to-end latency at a fixed offered rate.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};
use rdkafka::admin::{AdminClient, AdminOptions, NewTopic, TopicReplication};
use rdkafka::client::DefaultClientContext;
use rdkafka::consumer::{Consumer, StreamConsumer};
use rdkafka::error::{KafkaError, RDKafkaErrorCode};
use rdkafka::message::{Header, Message, OwnedHeaders};
use rdkafka::producer::{BaseRecord, DeliveryResult, Producer, ProducerContext, ThreadedProducer};
use rdkafka::{ClientConfig, ClientContext};
use serde_json::json;
use tokio_util::sync::CancellationToken;

use crate::cli::BenchStreamArgs;
use crate::io::kafka::config::{admin_config, consumer_config, producer_config};
use crate::io::message::Inbound;
use crate::metrics::Metrics;
use crate::model::snapshot::{self, SnapshotMeta};
use crate::model::Model;
use crate::runtime::model_view::ModelView;
use crate::runtime::router::{RouteScratch, Router};
use crate::runtime::Service;
use crate::settings::{CodecKind, Settings, SinkKind, SourceKind};
use crate::text::{Analyzer, AnalyzerScratch, TermBag};

pub(crate) const CLASSES: &[&str] = &["app", "auth", "network", "storage"];
const LINES: &[&[&str]] = &[
    &["worker pool exhausted, request queue full", "unhandled exception in checkout handler", "cache miss storm on catalog service", "slow response from pricing backend"],
    &["login failed for user, bad password", "token expired for session", "permission denied for role on resource", "too many sign-in attempts, account locked"],
    &["connection reset by peer on upstream", "dns lookup timed out for host", "tls handshake failed with gateway", "packet loss above threshold on link"],
    &["disk usage above limit on volume data", "write latency high on block device", "filesystem read-only after io error", "snapshot of volume failed, no space left"],
];

pub fn run(settings: Settings, args: &BenchStreamArgs) -> Result<()> {
    let brokers = args
        .brokers
        .clone()
        .or_else(|| std::env::var("SIEVELINE_TEST_BROKERS").ok())
        .unwrap_or_else(|| settings.kafka.bootstrap_servers.clone());
    if args.records == 0 || args.repeats == 0 || args.rate == 0 {
        bail!("--records, --repeats and --rate must be positive");
    }
    let dir = std::env::temp_dir().join(format!("sieveline-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let model_path = dir.join("logs-model.svm");
    train_log_model(&settings, &model_path)?;
    let run_id = format!("{}-{}", std::process::id(), crate::runtime::now_ms() % 1_000_000_000);
    let prefix = format!("bench.{run_id}");
    let mut s = settings.clone();
    s.kafka.bootstrap_servers = brokers.clone();
    s.source.kind = SourceKind::Kafka;
    s.source.codec = CodecKind::Text;
    s.sink.kind = SinkKind::Kafka;
    s.routing.topic_template = format!("{prefix}.routed.{{class}}");
    s.routing.review_topic = format!("{prefix}.review");
    s.dead_letter.topic = format!("{prefix}.dead");
    s.admin.enabled = false;
    s.service.model = model_path.display().to_string();
    let input = format!("{prefix}.in");
    let latency_in = format!("{prefix}.latency-in");
    s.source.topics = vec![input.clone()];
    s.validate().context("bench settings")?;

    let rt = tokio::runtime::Builder::new_multi_thread().enable_all().build()?;
    let mut topics: Vec<String> = CLASSES.iter().map(|c| format!("{prefix}.routed.{c}")).collect();
    topics.push(s.routing.review_topic.clone());
    topics.push(s.dead_letter.topic.clone());
    let mut all = topics.clone();
    all.push(input.clone());
    all.push(latency_in.clone());
    rt.block_on(create_topics(&s, &all, args.partitions))?;

    let lines = generate_lines(args.records, args.record_bytes, 1);
    let decision_bytes = mean_decision_bytes(&s, &lines[..lines.len().min(2000)])?;
    let t = Instant::now();
    produce_all(&brokers, &input, &lines)?;
    eprintln!("bench: produced {} records of {} bytes in {:.1}s", lines.len(), args.record_bytes, t.elapsed().as_secs_f64());

    let mut pass_rates = Vec::new();
    let mut svc_rates = Vec::new();
    for r in 0..args.repeats {
        let rate = rt.block_on(pass_through(&s, &input, &topics[..CLASSES.len()], lines.len(), decision_bytes, &format!("{prefix}-pass-{r}")))?;
        eprintln!("bench: pass-through run {}: {rate:.0} records/s", r + 1);
        pass_rates.push(rate);
        let mut sr = s.clone();
        sr.source.topics = vec![input.clone()];
        sr.kafka.group_id = format!("{prefix}-svc-{r}");
        let rate = rt.block_on(service_throughput(sr, lines.len()))?;
        eprintln!("bench: service run {}: {rate:.0} records/s", r + 1);
        svc_rates.push(rate);
    }
    let mut sl = s.clone();
    sl.source.topics = vec![latency_in.clone()];
    sl.kafka.group_id = format!("{prefix}-latency");
    let (lat, achieved) = rt.block_on(latency_run(sl, &brokers, &latency_in, args))?;
    let pass_in = format!("{prefix}.latency-pass-in");
    rt.block_on(create_topics(&s, std::slice::from_ref(&pass_in), args.partitions))?;
    let pass_lat = rt.block_on(pass_through_latency(&s, &brokers, &pass_in, &topics[..CLASSES.len()], decision_bytes, args))?;
    let pass = median(&mut pass_rates.clone());
    let svc = median(&mut svc_rates.clone());
    let report = json!({
        "records": lines.len(),
        "record_bytes": args.record_bytes,
        "decision_bytes_mean": decision_bytes,
        "partitions": args.partitions,
        "passthrough_records_per_sec": pass_rates,
        "service_records_per_sec": svc_rates,
        "passthrough_median": pass.round(),
        "service_median": svc.round(),
        "ratio": (svc / pass * 1000.0).round() / 1000.0,
        "latency": {
            "offered_rate": args.rate,
            "achieved_rate": achieved.round(),
            "records": lat.len(),
            "p50_ms": quantile(&lat, 0.50) * 1000.0,
            "p99_ms": quantile(&lat, 0.99) * 1000.0,
            "max_ms": lat.last().copied().unwrap_or(0.0) * 1000.0,
            "passthrough_p50_ms": quantile(&pass_lat, 0.50) * 1000.0,
            "passthrough_p99_ms": quantile(&pass_lat, 0.99) * 1000.0,
        },
        "brokers": brokers,
    });
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        println!(
            "records/s (median of {}): service {:.0}, pass-through {:.0}, ratio {:.3}\nend-to-end latency at {} records/s offered ({:.0} achieved, {} records): p50 {:.1} ms, p99 {:.1} ms",
            args.repeats, svc, pass, svc / pass, args.rate, achieved, lat.len(),
            quantile(&lat, 0.5) * 1000.0, quantile(&lat, 0.99) * 1000.0
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
    Ok(())
}

pub(crate) fn median(v: &mut [f64]) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    v[v.len() / 2]
}

/// `sorted` ascending; nearest-rank quantile.
fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return 0.0;
    }
    let i = ((q * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len()) - 1;
    sorted[i]
}

/// Log lines of an invented service fleet, padded to `bytes`.
pub(crate) fn generate_lines(n: usize, bytes: usize, seed: u64) -> Vec<Vec<u8>> {
    let mut x = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    let mut next = move || {
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        x.wrapping_mul(0x2545_F491_4F6C_DD1D)
    };
    (0..n)
        .map(|i| {
            let c = (next() % CLASSES.len() as u64) as usize;
            let msg = LINES[c][(next() % LINES[c].len() as u64) as usize];
            let mut line = format!(
                "2026-12-01T10:{:02}:{:02}Z node-{:02} svc-{}: {msg} req={:08x} seq={i}",
                (i / 60) % 60,
                i % 60,
                next() % 40,
                CLASSES[c],
                next() as u32
            )
            .into_bytes();
            line.resize(bytes.max(line.len().min(bytes)), b' ');
            line.truncate(bytes);
            line
        })
        .collect()
}

pub(crate) fn train_log_model(settings: &Settings, path: &std::path::Path) -> Result<()> {
    let analyzer = Analyzer::new(&settings.analyzer)?;
    let classes: Vec<String> = CLASSES.iter().map(|c| c.to_string()).collect();
    let mut model = Model::from_settings(&settings, classes)?;
    let mut scratch = AnalyzerScratch::default();
    let mut bag = TermBag::new();
    for (i, line) in generate_lines(4000, 120, 77).iter().enumerate() {
        let text = std::str::from_utf8(line)?;
        let class = CLASSES.iter().find(|c| text.contains(&format!("svc-{c}:"))).expect("class in line");
        // The service tag is part of the line; learn from the message words only.
        let msg = text.split_once(": ").map(|x| x.1).unwrap_or(text);
        analyzer.analyze_fields(std::iter::once((msg, 1.0)), &mut scratch, &mut bag);
        model.learn(&bag, class, 1.0)?;
        let _ = i;
    }
    snapshot::write(path, &model, &SnapshotMeta::fresh(&model, Some("bench-logs".into())))?;
    Ok(())
}

/// Mean decision payload size, so the pass-through writes outputs of the same size.
fn mean_decision_bytes(s: &Settings, sample: &[Vec<u8>]) -> Result<usize> {
    let view = ModelView::load(std::path::Path::new(&s.service.model), &s.analyzer)?;
    let router = Router::new(s)?;
    let mut scratch = RouteScratch::default();
    let mut total = 0usize;
    for (i, line) in sample.iter().enumerate() {
        let rec = Inbound { topic: "bench", partition: 0, offset: i as i64, key: None, payload: Some(line), headers: Vec::new(), timestamp_ms: None };
        total += router.route(&view, None, &rec, &mut scratch).0.payload.len();
    }
    Ok(total / sample.len().max(1))
}

pub(crate) async fn create_topics(s: &Settings, topics: &[String], partitions: i32) -> Result<()> {
    let admin: AdminClient<DefaultClientContext> = admin_config(s).create()?;
    let new: Vec<NewTopic> = topics.iter().map(|t| NewTopic::new(t, partitions, TopicReplication::Fixed(1))).collect();
    for r in admin.create_topics(new.iter(), &AdminOptions::new().operation_timeout(Some(Duration::from_secs(30)))).await? {
        if let Err((t, e)) = r {
            bail!("cannot create topic {t}: {e}");
        }
    }
    tokio::time::sleep(Duration::from_secs(1)).await;
    Ok(())
}

fn plain_producer(brokers: &str) -> Result<ThreadedProducer<rdkafka::producer::DefaultProducerContext>> {
    Ok(ClientConfig::new()
        .set("bootstrap.servers", brokers)
        .set("enable.idempotence", "true")
        .set("linger.ms", "1")
        .create()?)
}

fn send_retry<C: ProducerContext>(p: &ThreadedProducer<C>, mut rec: BaseRecord<'_, [u8], [u8], C::DeliveryOpaque>) {
    loop {
        match p.send(rec) {
            Ok(()) => return,
            Err((KafkaError::MessageProduction(RDKafkaErrorCode::QueueFull), back)) => {
                rec = back;
                std::thread::sleep(Duration::from_micros(200));
            }
            Err((e, _)) => panic!("bench produce failed: {e}"),
        }
    }
}

pub(crate) fn produce_all(brokers: &str, topic: &str, lines: &[Vec<u8>]) -> Result<()> {
    let p = plain_producer(brokers)?;
    for (i, l) in lines.iter().enumerate() {
        let key = format!("node-{}", i % 64);
        send_retry(&p, BaseRecord::to(topic).key(key.as_bytes()).payload(&l[..]));
    }
    p.flush(Duration::from_secs(120))?;
    Ok(())
}

/// Counts acks (a failed one is reported) and, in the latency run, records input timestamp → ack.
struct CountAcks(Arc<AtomicUsize>, Option<Arc<Mutex<Vec<f64>>>>);
impl ClientContext for CountAcks {}
impl ProducerContext for CountAcks {
    /// The input record's timestamp, milliseconds.
    type DeliveryOpaque = usize;
    fn delivery(&self, r: &DeliveryResult<'_>, input_ms: usize) {
        if let Err((e, _)) = r {
            eprintln!("bench: pass-through delivery failed: {e}");
        }
        if let Some(lat) = &self.1 {
            let secs = (crate::runtime::now_ms() - input_ms as i64).max(0) as f64 / 1000.0;
            lat.lock().expect("latency lock").push(secs);
        }
        self.0.fetch_add(1, Ordering::Relaxed);
    }
}

/// Consume `n` records, write one output of `size` bytes each (headers like the service's), records/s.
async fn pass_through(s: &Settings, input: &str, outs: &[String], n: usize, size: usize, group: &str) -> Result<f64> {
    let mut cc = consumer_config(s);
    cc.set("group.id", group);
    let consumer: StreamConsumer = cc.create()?;
    consumer.subscribe(&[input])?;
    pass_through_loop(s, consumer, outs, n, size, None).await
}

async fn pass_through_loop(
    s: &Settings,
    consumer: StreamConsumer,
    outs: &[String],
    n: usize,
    size: usize,
    lat: Option<Arc<Mutex<Vec<f64>>>>,
) -> Result<f64> {
    let acked = Arc::new(AtomicUsize::new(0));
    let producer: ThreadedProducer<CountAcks> = producer_config(s).create_with_context(CountAcks(acked.clone(), lat))?;
    let mut first = None;
    let mut payload = Vec::with_capacity(size);
    for i in 0..n {
        let m = consumer.recv().await?;
        first.get_or_insert_with(Instant::now);
        payload.clear();
        payload.extend_from_slice(m.payload().unwrap_or_default());
        payload.resize(size, b' ');
        let (p, o) = (m.partition().to_string(), m.offset().to_string());
        let headers = OwnedHeaders::new_with_capacity(6)
            .insert(Header { key: "sieveline.class", value: Some("storage") })
            .insert(Header { key: "sieveline.confidence", value: Some("0.999") })
            .insert(Header { key: "sieveline.decided_by", value: Some("model") })
            .insert(Header { key: "sieveline.source.topic", value: Some(m.topic()) })
            .insert(Header { key: "sieveline.source.partition", value: Some(p.as_str()) })
            .insert(Header { key: "sieveline.source.offset", value: Some(o.as_str()) });
        let input_ms = m.timestamp().to_millis().unwrap_or(0).max(0) as usize;
        let mut rec = BaseRecord::with_opaque_to(&outs[i % outs.len()], input_ms).payload(&payload[..]).headers(headers);
        if let Some(k) = m.key() {
            rec = rec.key(k);
        }
        loop {
            match producer.send(rec) {
                Ok(()) => break,
                Err((KafkaError::MessageProduction(RDKafkaErrorCode::QueueFull), back)) => {
                    rec = back;
                    tokio::time::sleep(Duration::from_millis(1)).await;
                }
                Err((e, _)) => bail!("pass-through produce failed: {e}"),
            }
        }
    }
    while acked.load(Ordering::Relaxed) < n {
        tokio::time::sleep(Duration::from_millis(2)).await;
    }
    let secs = first.expect("records consumed").elapsed().as_secs_f64();
    Ok(n as f64 / secs)
}

fn outputs(m: &Metrics) -> u64 {
    let dead: u64 = crate::io::headers::REASONS.iter().map(|r| m.dead_lettered.with_label_values(&[r]).get()).sum();
    m.records_out.get() + m.records_reviewed.get() + dead
}

/// The service in-process from its first record to the `n`th acknowledged output, records/s.
async fn service_throughput(s: Settings, n: usize) -> Result<f64> {
    let service = Service::new(s)?;
    let metrics = service.metrics();
    let token = CancellationToken::new();
    let handle = tokio::spawn(service.run(token.clone()));
    let mut first = None;
    loop {
        if first.is_none() && metrics.records_in.get() > 0 {
            first = Some(Instant::now());
        }
        if outputs(&metrics) >= n as u64 {
            break;
        }
        if handle.is_finished() {
            bail!("service stopped early");
        }
        tokio::time::sleep(Duration::from_millis(2)).await;
    }
    let secs = first.expect("records consumed").elapsed().as_secs_f64();
    token.cancel();
    handle.await??;
    Ok(n as f64 / secs)
}

/// The same offered load through the pass-through (partitions assigned directly, so no group join), sorted latencies (s).
async fn pass_through_latency(s: &Settings, brokers: &str, topic: &str, outs: &[String], size: usize, args: &BenchStreamArgs) -> Result<Vec<f64>> {
    let consumer: StreamConsumer = consumer_config(s).create()?;
    let mut tpl = rdkafka::TopicPartitionList::new();
    for p in 0..args.partitions {
        tpl.add_partition_offset(topic, p, rdkafka::Offset::Beginning)?;
    }
    consumer.assign(&tpl)?;
    let lat = Arc::new(Mutex::new(Vec::new()));
    let total = (args.rate * args.latency_secs) as usize;
    let feeder = spawn_feeder(brokers, topic, total, args);
    pass_through_loop(s, consumer, outs, total, size, Some(lat.clone())).await?;
    feeder.await??;
    let mut v = std::mem::take(&mut *lat.lock().expect("latency lock"));
    v.sort_by(|a, b| a.total_cmp(b));
    Ok(v)
}

/// Produce `total` lines at `args.rate` records/s on a blocking thread; returns the achieved rate.
fn spawn_feeder(brokers: &str, topic: &str, total: usize, args: &BenchStreamArgs) -> tokio::task::JoinHandle<Result<f64>> {
    let lines = generate_lines(total, args.record_bytes, 2);
    let (b, t, rate) = (brokers.to_string(), topic.to_string(), args.rate);
    tokio::task::spawn_blocking(move || -> Result<f64> {
        let p = plain_producer(&b)?;
        let start = Instant::now();
        for (i, l) in lines.iter().enumerate() {
            if i % 20 == 0 {
                let due = start + Duration::from_secs_f64(i as f64 / rate as f64);
                if let Some(w) = due.checked_duration_since(Instant::now()) {
                    std::thread::sleep(w);
                }
            }
            let key = format!("node-{}", i % 64);
            send_retry(&p, BaseRecord::to(&t).key(key.as_bytes()).payload(&l[..]));
        }
        let achieved = lines.len() as f64 / start.elapsed().as_secs_f64();
        p.flush(Duration::from_secs(60))?;
        Ok(achieved)
    })
}

/// Offer `args.rate` records/s for `args.latency_secs` to a running service; sorted latencies (s) and the achieved rate.
async fn latency_run(s: Settings, brokers: &str, topic: &str, args: &BenchStreamArgs) -> Result<(Vec<f64>, f64)> {
    let mut service = Service::new(s)?;
    let lat: Arc<Mutex<Vec<(f64, f64)>>> = Arc::new(Mutex::new(Vec::with_capacity((args.rate * args.latency_secs) as usize)));
    let l2 = lat.clone();
    let t0 = Instant::now();
    service.set_latency_hook(Arc::new(move |secs| l2.lock().expect("latency lock").push((t0.elapsed().as_secs_f64(), secs))));
    let metrics = service.metrics();
    let ready = service.readiness();
    let token = CancellationToken::new();
    let handle = tokio::spawn(service.run(token.clone()));
    while !ready.ready() {
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
    tokio::time::sleep(Duration::from_millis(500)).await;
    let total = (args.rate * args.latency_secs) as usize;
    let achieved = spawn_feeder(brokers, topic, total, args).await??;
    while outputs(&metrics) < total as u64 {
        tokio::time::sleep(Duration::from_millis(5)).await;
    }
    token.cancel();
    handle.await??;
    let timed = std::mem::take(&mut *lat.lock().expect("latency lock"));
    // p99 per second of the run, to show where the tail sits.
    let start = timed.first().map(|x| x.0).unwrap_or(0.0);
    let mut per_sec: Vec<Vec<f64>> = Vec::new();
    for &(at, l) in &timed {
        let i = (at - start) as usize;
        if per_sec.len() <= i {
            per_sec.resize(i + 1, Vec::new());
        }
        per_sec[i].push(l);
    }
    let p99s: Vec<String> = per_sec
        .iter_mut()
        .map(|v| {
            v.sort_by(|a, b| a.total_cmp(b));
            format!("{:.0}", quantile(v, 0.99) * 1000.0)
        })
        .collect();
    eprintln!("bench: latency p99 per second (ms): {}", p99s.join(" "));
    let mut v: Vec<f64> = timed.into_iter().map(|x| x.1).collect();
    v.sort_by(|a, b| a.total_cmp(b));
    Ok((v, achieved))
}
