//! Consumer lag from librdkafka's statistics JSON (enabled by `statistics.interval.ms`): records behind the end of each assigned partition, summed.

use std::collections::HashMap;

use serde::Deserialize;

#[derive(Deserialize)]
struct Stats {
    #[serde(default)]
    topics: HashMap<String, TopicStats>,
}

#[derive(Deserialize)]
struct TopicStats {
    #[serde(default)]
    partitions: HashMap<String, PartitionStats>,
}

#[derive(Deserialize)]
struct PartitionStats {
    partition: i32,
    #[serde(default)]
    desired: bool,
    #[serde(default = "unknown")]
    consumer_lag: i64,
}

fn unknown() -> i64 {
    -1
}

/// The summed lag of the partitions this consumer wants (assigned), skipping
/// librdkafka's internal partition -1 and lags it does not know yet (-1).
/// `None` when the JSON is not librdkafka statistics.
pub fn consumer_lag(stats_json: &[u8]) -> Option<i64> {
    let s: Stats = serde_json::from_slice(stats_json).ok()?;
    Some(
        s.topics
            .values()
            .flat_map(|t| t.partitions.values())
            .filter(|p| p.partition >= 0 && p.desired && p.consumer_lag >= 0)
            .map(|p| p.consumer_lag)
            .sum(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sums_assigned_partitions_with_a_known_lag() {
        // The shape of librdkafka's statistics (STATISTICS.md of librdkafka: topics → partitions,
        // with "desired" for partitions the consumer wants and "consumer_lag", -1 when unknown).
        let json = br#"{"name":"c","type":"consumer","topics":{
            "tickets.in":{"topic":"tickets.in","partitions":{
                "0":{"partition":0,"desired":true,"consumer_lag":120},
                "1":{"partition":1,"desired":true,"consumer_lag":-1},
                "2":{"partition":2,"desired":false,"consumer_lag":999},
                "-1":{"partition":-1,"desired":false,"consumer_lag":-1}}},
            "logs.in":{"topic":"logs.in","partitions":{"0":{"partition":0,"desired":true,"consumer_lag":5}}}}}"#;
        assert_eq!(consumer_lag(json), Some(125));
        assert_eq!(consumer_lag(br#"{"topics":{}}"#), Some(0));
        assert_eq!(consumer_lag(b"not json"), None);
    }
}
