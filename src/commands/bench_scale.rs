//! `sieveline bench-scale`: records/s of 1, 2, 3 … replicas of `sieveline run` (separate processes, one consumer group) draining one pre-filled input topic, and the time until every partition is owned again after a replica is killed (SIGKILL) or leaves (SIGTERM).
//!
//! Throughput is timed from the moment the replicas' assignments cover every input partition
//! exactly once (so group joins are not in it) to the last output acknowledged, and counts only
//! the records processed in that window. Replicas are polled over their admin endpoints.

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};
use serde_json::json;

use super::bench_stream::{create_topics, generate_lines, median, produce_all, train_log_model, CLASSES};
use crate::cli::BenchScaleArgs;
use crate::settings::{CodecKind, Settings, SinkKind, SourceKind};

const POLL: Duration = Duration::from_millis(25);
const JOIN_LIMIT: Duration = Duration::from_secs(120);

pub fn run(settings: Settings, args: &BenchScaleArgs) -> Result<()> {
    let brokers = args
        .brokers
        .clone()
        .or_else(|| std::env::var("SIEVELINE_TEST_BROKERS").ok())
        .unwrap_or_else(|| settings.kafka.bootstrap_servers.clone());
    if args.records == 0 || args.repeats == 0 || args.replicas.is_empty() || args.replicas.contains(&0) {
        bail!("--records, --repeats and every --replicas count must be positive");
    }
    let dir = std::env::temp_dir().join(format!("sieveline-bench-scale-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let model = dir.join("logs-model.svm");
    train_log_model(&settings, &model)?;
    let run_id = format!("{}-{}", std::process::id(), crate::runtime::now_ms() % 1_000_000_000);
    let prefix = format!("bench-scale.{run_id}");
    let input = format!("{prefix}.in");

    let mut s = settings.clone();
    s.kafka.bootstrap_servers = brokers.clone();
    s.source.kind = SourceKind::Kafka;
    s.source.codec = CodecKind::Text;
    s.source.topics = vec![input.clone()];
    s.sink.kind = SinkKind::Kafka;
    s.routing.topic_template = format!("{prefix}.routed.{{class}}");
    s.routing.review_topic = format!("{prefix}.review");
    s.dead_letter.topic = format!("{prefix}.dead");
    s.service.model = model.display().to_string();
    s.admin.enabled = true;
    s.admin.token.clear();
    s.kafka.properties.insert("session.timeout.ms".into(), args.session_timeout_ms.to_string());
    s.kafka.properties.insert("heartbeat.interval.ms".into(), (args.session_timeout_ms / 10).max(100).to_string());
    s.validate().context("bench settings")?;

    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build()?;
    let mut topics: Vec<String> = CLASSES.iter().map(|c| format!("{prefix}.routed.{c}")).collect();
    topics.push(s.routing.review_topic.clone());
    topics.push(s.dead_letter.topic.clone());
    topics.push(input.clone());
    rt.block_on(create_topics(&s, &topics, args.partitions))?;
    let lines = generate_lines(args.records, args.record_bytes, 1);
    let t = Instant::now();
    produce_all(&brokers, &input, &lines)?;
    eprintln!("bench-scale: produced {} records of {} bytes over {} partitions in {:.1}s", lines.len(), args.record_bytes, args.partitions, t.elapsed().as_secs_f64());
    let exe = std::env::current_exe().context("the sieveline binary")?;

    let mut rows = Vec::new();
    for &n in &args.replicas {
        let mut rates = Vec::new();
        let mut per_cpu_rates = Vec::new();
        let mut shares = Vec::new();
        for r in 0..args.repeats {
            let mut sr = s.clone();
            sr.kafka.group_id = format!("{prefix}-n{n}-r{r}");
            let mut fleet = Fleet::start(&exe, &sr, n, &dir, &format!("n{n}-r{r}"))?;
            fleet.wait_covered(&input, args.partitions, JOIN_LIMIT)?;
            let (t0, c0) = (Instant::now(), fleet.outputs());
            let in0 = fleet.records_in();
            let cpu0 = fleet.cpu_seconds();
            let total = lines.len() as u64;
            while fleet.outputs() < total {
                fleet.check_alive()?;
                std::thread::sleep(POLL);
            }
            let secs = t0.elapsed().as_secs_f64();
            let rate = (total - c0) as f64 / secs;
            let cpu = fleet.cpu_seconds() - cpu0;
            let per_cpu = (total - c0) as f64 / cpu.max(1e-9);
            let ins: Vec<u64> = fleet.records_in().iter().zip(&in0).map(|(a, b)| a - b).collect();
            eprintln!(
                "bench-scale: {n} replica(s), run {}: {rate:.0} records/s over {} records in the window; {cpu:.2} CPU-s in the replicas ({per_cpu:.0} records per CPU-second); per replica read {ins:?}",
                r + 1,
                total - c0
            );
            rates.push(rate);
            per_cpu_rates.push(per_cpu);
            shares.push(ins);
            fleet.stop_all(Duration::from_secs(30))?;
        }
        let med = median(&mut rates.clone());
        rows.push(json!({
            "replicas": n,
            "records_per_sec": rates.iter().map(|r| r.round() as i64).collect::<Vec<_>>(),
            "median": med.round() as i64,
            "median_per_replica": (med / n as f64).round() as i64,
            "records_per_cpu_second": per_cpu_rates.iter().map(|r| r.round() as i64).collect::<Vec<_>>(),
            "records_per_cpu_second_median": median(&mut per_cpu_rates.clone()).round() as i64,
            "records_read_per_replica": shares,
        }));
    }

    // Loss of a replica: SIGKILL (found by the session timeout) and SIGTERM (leaves the group).
    let n = *args.replicas.iter().max().expect("replica counts");
    let (mut killed, mut left) = (Vec::new(), Vec::new());
    if n >= 3 {
        for r in 0..args.repeats {
            let mut sr = s.clone();
            sr.kafka.group_id = format!("{prefix}-failover-{r}");
            let mut fleet = Fleet::start(&exe, &sr, n, &dir, &format!("failover-{r}"))?;
            fleet.wait_covered(&input, args.partitions, JOIN_LIMIT)?;
            std::thread::sleep(Duration::from_millis(1000));
            let t = Instant::now();
            fleet.kill(n - 1);
            fleet.wait_covered(&input, args.partitions, JOIN_LIMIT)?;
            killed.push(t.elapsed().as_secs_f64() * 1000.0);
            std::thread::sleep(Duration::from_millis(1000));
            let t = Instant::now();
            fleet.terminate(n - 2);
            fleet.wait_covered(&input, args.partitions, JOIN_LIMIT)?;
            left.push(t.elapsed().as_secs_f64() * 1000.0);
            eprintln!("bench-scale: failover run {}: SIGKILL → covered in {:.0} ms; SIGTERM → covered in {:.0} ms", r + 1, killed[r], left[r]);
            fleet.stop_all(Duration::from_secs(30))?;
        }
    }
    let cores = std::thread::available_parallelism().map(|c| c.get()).unwrap_or(1);
    let report = json!({
        "records": lines.len(),
        "record_bytes": args.record_bytes,
        "partitions": args.partitions,
        "cores": cores,
        "throughput": rows,
        "failover": {
            "replicas": n,
            "session_timeout_ms": args.session_timeout_ms,
            "sigkill_to_covered_ms": killed.iter().map(|x| x.round() as i64).collect::<Vec<_>>(),
            "sigterm_to_covered_ms": left.iter().map(|x| x.round() as i64).collect::<Vec<_>>(),
            "sigkill_median_ms": if killed.is_empty() { None } else { Some(median(&mut killed.clone()).round() as i64) },
            "sigterm_median_ms": if left.is_empty() { None } else { Some(median(&mut left.clone()).round() as i64) },
        },
        "brokers": brokers,
    });
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        println!("{} records of {} bytes, {} partitions, {} cores", lines.len(), args.record_bytes, args.partitions, cores);
        for r in report["throughput"].as_array().expect("rows") {
            println!(
                "{} replica(s): median {} records/s ({} per replica), runs {}; {} records per CPU-second of the replicas",
                r["replicas"], r["median"], r["median_per_replica"], r["records_per_sec"], r["records_per_cpu_second_median"]
            );
        }
        let f = &report["failover"];
        println!(
            "loss of 1 of {} replicas (session.timeout.ms {}): SIGKILL → covered median {} ms, SIGTERM → covered median {} ms",
            f["replicas"], f["session_timeout_ms"], f["sigkill_median_ms"], f["sigterm_median_ms"]
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
    Ok(())
}

/// `sieveline run` processes of one consumer group, each with its own admin port.
struct Fleet {
    replicas: Vec<Option<Replica>>,
}

struct Replica {
    child: Child,
    port: u16,
}

impl Drop for Replica {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
        }
        let _ = self.child.wait();
    }
}

impl Fleet {
    fn start(exe: &Path, base: &Settings, n: usize, dir: &Path, tag: &str) -> Result<Fleet> {
        let mut replicas = Vec::new();
        for i in 0..n {
            let port = std::net::TcpListener::bind("127.0.0.1:0")?.local_addr()?.port();
            let mut s = base.clone();
            s.admin.bind = format!("127.0.0.1:{port}");
            let cfg: PathBuf = dir.join(format!("settings-{tag}-{i}.toml"));
            std::fs::write(&cfg, toml::to_string(&s).context("settings as TOML")?)?;
            let log = std::fs::File::create(dir.join(format!("replica-{tag}-{i}.log")))?;
            let child = Command::new(exe)
                .arg("--config")
                .arg(&cfg)
                .arg("run")
                .env("SIEVELINE_LOG", "warn")
                .stdin(Stdio::null())
                .stdout(Stdio::null())
                .stderr(log)
                .spawn()
                .context("spawn sieveline run")?;
            replicas.push(Some(Replica { child, port }));
        }
        Ok(Fleet { replicas })
    }

    fn alive(&self) -> impl Iterator<Item = &Replica> {
        self.replicas.iter().flatten()
    }

    fn check_alive(&mut self) -> Result<()> {
        for r in self.replicas.iter_mut().flatten() {
            if let Some(st) = r.child.try_wait()? {
                bail!("a replica exited early ({st})");
            }
        }
        Ok(())
    }

    /// Wait until the live replicas own every partition of `topic` exactly once, seen twice in a row.
    fn wait_covered(&mut self, topic: &str, partitions: i32, limit: Duration) -> Result<()> {
        let deadline = Instant::now() + limit;
        let mut last: Option<Vec<Vec<i64>>> = None;
        loop {
            self.check_alive()?;
            let now: Option<Vec<Vec<i64>>> = self.alive().map(|r| owned(r.port, topic)).collect();
            if let Some(sets) = &now {
                let mut all: Vec<i64> = sets.iter().flatten().copied().collect();
                all.sort_unstable();
                let exact = all == (0..partitions as i64).collect::<Vec<_>>();
                if exact && last.as_ref() == Some(sets) {
                    return Ok(());
                }
            }
            last = now;
            if Instant::now() >= deadline {
                bail!("partitions of {topic} not covered exactly once after {limit:?}: {last:?}");
            }
            std::thread::sleep(POLL);
        }
    }

    /// Outputs acknowledged over the live replicas (decisions, reviews, dead letters).
    fn outputs(&self) -> u64 {
        self.alive()
            .map(|r| {
                let m = get(r.port, crate::admin::PATH_METRICS).unwrap_or_default();
                sum_samples(&m, crate::metrics::RECORDS_OUT)
                    + sum_samples(&m, crate::metrics::RECORDS_REVIEWED)
                    + sum_samples(&m, crate::metrics::RECORDS_DEAD_LETTERED)
            })
            .sum()
    }

    fn records_in(&self) -> Vec<u64> {
        self.alive()
            .map(|r| sum_samples(&get(r.port, crate::admin::PATH_METRICS).unwrap_or_default(), crate::metrics::RECORDS_IN))
            .collect()
    }

    /// CPU time (user + system) the live replicas have used, from /proc/PID/stat (Linux).
    fn cpu_seconds(&self) -> f64 {
        let tick = clock_ticks_per_second();
        self.alive()
            .map(|r| {
                let stat = std::fs::read_to_string(format!("/proc/{}/stat", r.child.id())).unwrap_or_default();
                // Fields after the command name (which is in parentheses): utime is the 12th, stime the 13th.
                let rest = stat.rsplit_once(')').map(|x| x.1).unwrap_or("");
                let f: Vec<&str> = rest.split_whitespace().collect();
                let ticks = |i: usize| f.get(i).and_then(|x| x.parse::<u64>().ok()).unwrap_or(0);
                (ticks(11) + ticks(12)) as f64 / tick
            })
            .sum()
    }

    fn kill(&mut self, i: usize) {
        if let Some(mut r) = self.replicas[i].take() {
            let _ = r.child.kill();
            let _ = r.child.wait();
        }
    }

    fn terminate(&mut self, i: usize) {
        if let Some(r) = &self.replicas[i] {
            let _ = Command::new("kill").arg("-TERM").arg(r.child.id().to_string()).status();
        }
        // Reaped in stop_all or on drop; it leaves the group on its way out.
        if let Some(mut r) = self.replicas[i].take() {
            let deadline = Instant::now() + Duration::from_secs(30);
            while Instant::now() < deadline {
                if let Ok(Some(_)) = r.child.try_wait() {
                    return;
                }
                std::thread::sleep(Duration::from_millis(10));
            }
            let _ = r.child.kill();
        }
    }

    fn stop_all(&mut self, limit: Duration) -> Result<()> {
        for r in self.replicas.iter().flatten() {
            let _ = Command::new("kill").arg("-TERM").arg(r.child.id().to_string()).status();
        }
        let deadline = Instant::now() + limit;
        for r in self.replicas.iter_mut().flatten() {
            loop {
                if let Some(st) = r.child.try_wait()? {
                    if !st.success() {
                        bail!("a replica exited with {st} after SIGTERM");
                    }
                    break;
                }
                if Instant::now() >= deadline {
                    bail!("a replica did not stop within {limit:?}");
                }
                std::thread::sleep(Duration::from_millis(20));
            }
        }
        self.replicas.clear();
        Ok(())
    }
}

/// Kernel clock ticks per second (`getconf CLK_TCK`; 100 on common Linux builds if that fails).
fn clock_ticks_per_second() -> f64 {
    Command::new("getconf")
        .arg("CLK_TCK")
        .output()
        .ok()
        .and_then(|o| String::from_utf8(o.stdout).ok()?.trim().parse().ok())
        .unwrap_or(100.0)
}

/// The partitions of `topic` a replica owns, from `GET /assignment`.
fn owned(port: u16, topic: &str) -> Option<Vec<i64>> {
    let body = get(port, crate::admin::PATH_ASSIGNMENT)?;
    let v: serde_json::Value = serde_json::from_str(&body).ok()?;
    Some(v["partitions"].get(topic).and_then(|p| p.as_array()).map(|a| a.iter().filter_map(|x| x.as_i64()).collect()).unwrap_or_default())
}

/// Sum of the samples of one metric family in Prometheus text (counters with or without labels).
fn sum_samples(text: &str, name: &str) -> u64 {
    text.lines()
        .filter(|l| l.starts_with(name) && matches!(l.as_bytes().get(name.len()), Some(b' ') | Some(b'{')))
        .filter_map(|l| l.rsplit(' ').next()?.parse::<f64>().ok())
        .sum::<f64>() as u64
}

/// A minimal HTTP/1.1 GET to a loopback admin endpoint; the body of a 200 answer.
fn get(port: u16, path: &str) -> Option<String> {
    let mut s = TcpStream::connect_timeout(&([127, 0, 0, 1], port).into(), Duration::from_secs(2)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(5))).ok()?;
    write!(s, "GET {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n\r\n").ok()?;
    let mut resp = String::new();
    s.read_to_string(&mut resp).ok()?;
    let (head, body) = resp.split_once("\r\n\r\n")?;
    if !head.starts_with("HTTP/1.1 200") {
        return None;
    }
    if head.to_ascii_lowercase().contains("transfer-encoding: chunked") {
        let mut out = String::new();
        let mut rest = body;
        while let Some((len, tail)) = rest.split_once("\r\n") {
            let n = usize::from_str_radix(len.trim(), 16).ok()?;
            if n == 0 || tail.len() < n {
                break;
            }
            out.push_str(&tail[..n]);
            rest = tail[n..].trim_start_matches("\r\n");
        }
        return Some(out);
    }
    Some(body.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sums_labelled_and_plain_samples_of_one_family_only() {
        let text = "# HELP x\nsieveline_records_out_total 7\nsieveline_records_out_total_extra 100\n\
                    sieveline_records_dead_lettered_total{reason=\"bad json\"} 2\n\
                    sieveline_records_dead_lettered_total{reason=\"oversize\"} 3\n";
        assert_eq!(sum_samples(text, "sieveline_records_out_total"), 7);
        assert_eq!(sum_samples(text, "sieveline_records_dead_lettered_total"), 5);
        assert_eq!(sum_samples(text, "sieveline_records_in_total"), 0);
    }
}
