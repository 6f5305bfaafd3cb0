//! Scale-out across replicas against the real broker (`SIEVELINE_TEST_BROKERS`; missing is a failure): one consumer group, a 6-partition input topic, replicas joining and leaving (reference: Kafka's consumer-group protocol, where the group coordinator hands each partition to exactly one member per generation, as librdkafka implements it).
//!
//! Index — what each test guards:
//! 1. `one_two_three_replicas_cover_every_partition_once_and_lose_nothing` — 1, then 2, then 3
//!    replicas each drain a fixed stream with zero loss and no duplicates; after each join, and
//!    after a SIGKILL and a SIGTERM leave under load, `/assignment` of the live replicas covers the
//!    6 partitions exactly once, balanced; every replica reads records; nothing is lost across the
//!    kill, and duplicates stay within the at-least-once bound. The time from each loss to full
//!    coverage is printed (a figure, not an assertion: the bench `sieveline bench-scale` measures it).

use crate::common;

use std::time::{Duration, Instant};

use common::data::{self, train_model, CLASSES};
use common::kafka::{input_positions, produce_all, tally, Collector, Feeder};
use common::process::{Scenario, ServiceProc};
use common::{brokers, http, test_dir};

const PARTITIONS: i32 = 6;
const READY: Duration = Duration::from_secs(60);
const COVER: Duration = Duration::from_secs(60);

/// The input partitions a replica owns, from `GET /assignment`.
fn owned(p: &ServiceProc, topic: &str) -> Option<Vec<i32>> {
    let (st, body) = http(p.port, "GET", "/assignment", None, b"")?;
    if st != 200 {
        return None;
    }
    let v: serde_json::Value = serde_json::from_str(&body).ok()?;
    Some(v["partitions"].get(topic).and_then(|a| a.as_array()).map(|a| a.iter().map(|x| x.as_i64().unwrap() as i32).collect()).unwrap_or_default())
}

/// Wait until `live` own every partition exactly once, balanced (sizes differ by at most one),
/// the same on two reads in a row; returns the sets and when coverage was first seen.
fn wait_covered(live: &[&ServiceProc], topic: &str, what: &str) -> (Vec<Vec<i32>>, Instant) {
    let deadline = Instant::now() + COVER;
    let mut last: Option<Vec<Vec<i32>>> = None;
    let mut first_seen: Option<Instant> = None;
    loop {
        let now: Option<Vec<Vec<i32>>> = live.iter().map(|p| owned(p, topic)).collect();
        let exact = now.as_ref().is_some_and(|sets| {
            let mut all: Vec<i32> = sets.iter().flatten().copied().collect();
            all.sort_unstable();
            let sizes: Vec<usize> = sets.iter().map(Vec::len).collect();
            all == (0..PARTITIONS).collect::<Vec<_>>() && sizes.iter().max().unwrap() - sizes.iter().min().unwrap() <= 1
        });
        if exact {
            let seen = *first_seen.get_or_insert_with(Instant::now);
            if last == now {
                return (now.unwrap(), seen);
            }
        } else {
            first_seen = None;
        }
        last = now;
        assert!(Instant::now() < deadline, "{what}: partitions not covered exactly once after {COVER:?}: {last:?}");
        std::thread::sleep(Duration::from_millis(50));
    }
}

fn records_in(p: &ServiceProc) -> f64 {
    p.counter("sieveline_records_in_total").unwrap_or(0.0)
}

#[test]
fn one_two_three_replicas_cover_every_partition_once_and_lose_nothing() {
    let brokers = brokers();
    let dir = test_dir("scale3");
    let model = train_model(&dir);
    let sc = Scenario::new("scale3", &brokers, &model, &dir, PARTITIONS);
    let outs = sc.create_topics(CLASSES);
    let mut col = Collector::new(&brokers, &outs);
    let mut batch_end: Vec<Vec<(i32, i64)>> = Vec::new();

    // Phase n: n replicas, then one fixed stream of 3000 records through them.
    let mut replicas: Vec<ServiceProc> = Vec::new();
    for (n, tag) in [(1usize, "a"), (2, "b"), (3, "c")] {
        let t_start = Instant::now();
        let mut p = sc.start(tag);
        p.wait_ready(READY);
        replicas.push(p);
        let live: Vec<&ServiceProc> = replicas.iter().collect();
        let (sets, seen) = wait_covered(&live, &sc.input, &format!("{n} replica(s)"));
        eprintln!("{n} replica(s): covered {sets:?} {:.1}s after the start of the newest", (seen - t_start).as_secs_f64());
        for s in &sets {
            assert_eq!(s.len(), PARTITIONS as usize / n, "balanced: {sets:?}");
        }
        let before: Vec<f64> = replicas.iter().map(records_in).collect();
        produce_all(&brokers, &sc.input, &data::stream(3000, 300, Some(100), 20 + n as u64));
        let expected = input_positions(&brokers, &sc.input, PARTITIONS);
        assert!(col.until_covered(&expected, Duration::from_secs(120)), "{n} replica(s): not every input got an output");
        for (i, p) in replicas.iter().enumerate() {
            assert!(records_in(p) > before[i], "{n} replica(s): replica {i} read records of this stream");
        }
        batch_end.push(expected);
    }
    // Outputs of the joined phases: exactly one each (rebalances on join drain and commit first).
    col.poll_for(Duration::from_secs(1));
    let clean = batch_end.last().unwrap().clone();
    let t = tally(&clean, &col.per_source());
    eprintln!("1, 2, 3 replicas, 9000 records: {t:?}");
    assert_eq!(t.missing, 0, "{t:?}");
    assert_eq!(t.duplicates, 0, "joins commit what was written before partitions move: {t:?}");

    // Losses under load: SIGKILL the newest replica, then SIGTERM the second.
    let feeder = Feeder::start(&brokers, &sc.input, data::stream(8000, 400, Some(100), 30), 1000);
    replicas[2].wait_counter_at_least("sieveline_records_in_total", records_in(&replicas[2]) + 200.0, Duration::from_secs(60));
    let killed_owned = owned(&replicas[2], &sc.input).unwrap().len();
    let kill_ms = now_ms();
    let t_kill = Instant::now();
    replicas[2].kill9();
    let live: Vec<&ServiceProc> = replicas[..2].iter().collect();
    let (sets, seen) = wait_covered(&live, &sc.input, "after SIGKILL");
    let kill_to_cover = seen - t_kill;
    eprintln!("SIGKILL of 1 of 3 replicas: covered {sets:?} after {:.2}s (session.timeout.ms 6000)", kill_to_cover.as_secs_f64());

    let t_term = Instant::now();
    replicas[1].signal("TERM");
    let live: Vec<&ServiceProc> = replicas[..1].iter().collect();
    let (sets, seen) = wait_covered(&live, &sc.input, "after SIGTERM");
    eprintln!("SIGTERM of 1 of 2 replicas: covered {sets:?} after {:.2}s", (seen - t_term).as_secs_f64());
    let st = replicas[1].wait_exit(Duration::from_secs(30)).expect("the leaving replica exits");
    assert!(st.success(), "{st}");

    feeder.finish();
    let expected = input_positions(&brokers, &sc.input, PARTITIONS);
    assert_eq!(expected.len(), 17_000);
    assert!(col.until_covered(&expected, Duration::from_secs(120)), "every record after the losses got an output; log {}", replicas[0].log.display());
    col.poll_for(Duration::from_secs(1));
    replicas[0].signal("TERM");
    assert!(replicas[0].wait_exit(Duration::from_secs(30)).expect("exits").success());

    let per = col.per_source();
    let t = tally(&expected, &per);
    // At least once: the killed replica's unacknowledged and uncommitted records are read again,
    // at most its in-flight bound per owned partition plus what it acknowledged within one commit
    // interval before the kill (outputs' CreateTime, 250 ms slack).
    let window = sc.commit_interval_ms as i64 + 250;
    let acked_in_window = col.records.iter().filter(|r| r.timestamp_ms > kill_ms - window && r.timestamp_ms <= kill_ms).count();
    let bound = sc.max_in_flight * killed_owned + acked_in_window;
    eprintln!("all phases, 17000 records: {t:?}; duplicate bound {bound}");
    assert_eq!(t.missing, 0, "{t:?}");
    assert!(t.duplicates <= bound, "{t:?} exceeds {bound}");
    let replayed: usize = clean.iter().map(|p| per[p] - 1).sum();
    assert_eq!(replayed, 0, "the kill did not replay records of the join phases");
}

fn now_ms() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_millis() as i64
}
