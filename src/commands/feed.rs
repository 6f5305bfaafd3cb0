//! `sieveline feed`: produce a JSON-lines file to a Kafka topic, keyed by a field of each line (murmur2, as Java clients partition), optionally into the partition a field names and at a steady rate — for trying the service on a real broker (`demo-stream/run-on-kafka.sh`).

use std::io::BufRead;
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};
use rdkafka::producer::{BaseRecord, Producer, ThreadedProducer};
use rdkafka::producer::DefaultProducerContext;

use crate::cli::FeedArgs;
use crate::io::kafka::config::producer_config;
use crate::io::record::json_path;
use crate::settings::Settings;

pub fn run(settings: Settings, args: &FeedArgs) -> Result<()> {
    let producer: ThreadedProducer<DefaultProducerContext> =
        producer_config(&settings).create().context("create the Kafka producer")?;
    let file = std::fs::File::open(&args.file).with_context(|| format!("open {}", args.file.display()))?;
    let started = Instant::now();
    let mut sent = 0u64;
    for (n, line) in std::io::BufReader::new(file).split(b'\n').enumerate() {
        let line = line?;
        if line.iter().all(u8::is_ascii_whitespace) {
            continue;
        }
        let v: serde_json::Value = serde_json::from_slice(&line)
            .with_context(|| format!("{} line {}: not JSON", args.file.display(), n + 1))?;
        let text = |path: &str| json_path(&v, path).map(|x| x.as_str().map(str::to_string).unwrap_or_else(|| x.to_string()));
        let key = args.key_field.as_deref().and_then(text);
        let partition = match args.partition_field.as_deref().map(|p| json_path(&v, p)) {
            Some(Some(p)) => Some(p.as_i64().filter(|p| *p >= 0).with_context(|| format!("line {}: partition is not a number", n + 1))? as i32),
            _ => None,
        };
        if args.rate > 0.0 {
            let due = started + Duration::from_secs_f64(sent as f64 / args.rate);
            if let Some(w) = due.checked_duration_since(Instant::now()) {
                std::thread::sleep(w);
            }
        }
        let mut rec = BaseRecord::to(&args.topic).payload(&line[..]);
        if let Some(k) = &key {
            rec = rec.key(k.as_bytes());
        }
        if let Some(p) = partition {
            rec = rec.partition(p);
        }
        loop {
            match producer.send(rec) {
                Ok(()) => break,
                Err((e, back)) if e.rdkafka_error_code() == Some(rdkafka::types::RDKafkaErrorCode::QueueFull) => {
                    rec = back;
                    std::thread::sleep(Duration::from_millis(5));
                }
                Err((e, _)) => bail!("produce to {}: {e}", args.topic),
            }
        }
        sent += 1;
    }
    producer.flush(Duration::from_secs(60)).context("flush: not every record was acknowledged")?;
    eprintln!("fed {sent} records to {} in {:.1}s", args.topic, started.elapsed().as_secs_f64());
    Ok(())
}
