//! Smoke run of `sieveline bench-stream` against the test broker (`SIEVELINE_TEST_BROKERS`; missing is a failure): tiny sizes, so the test command stays fast; the real figures come from the full bench.
//!
//! Index: `bench_stream_reports_both_rates_and_latency_quantiles` — the bench runs end to end and reports positive service and pass-through rates and ordered latency quantiles.

use crate::common;

#[test]
fn bench_stream_reports_both_rates_and_latency_quantiles() {
    let brokers = common::brokers();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_sieveline"))
        .args(["bench-stream", "--brokers", &brokers, "--records", "3000", "--repeats", "1", "--rate", "2000", "--latency-secs", "2", "--json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON report");
    assert_eq!(r["records"], 3000);
    assert!(r["service_median"].as_f64().unwrap() > 0.0, "{r}");
    assert!(r["passthrough_median"].as_f64().unwrap() > 0.0, "{r}");
    assert!(r["decision_bytes_mean"].as_u64().unwrap() > 120, "decisions are bigger than the input lines");
    let lat = &r["latency"];
    assert_eq!(lat["records"], 4000, "every offered record was measured");
    let (p50, p99) = (lat["p50_ms"].as_f64().unwrap(), lat["p99_ms"].as_f64().unwrap());
    assert!(p50 >= 0.0 && p50 <= p99 && p99 <= lat["max_ms"].as_f64().unwrap(), "{lat}");
}
