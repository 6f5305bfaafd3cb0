//! librdkafka client configuration: the settings' pass-through properties plus the properties delivery guarantees depend on, which the service always sets itself.

use rdkafka::ClientConfig;

use crate::settings::{kafka_property_name, Settings};

/// Consumer: consumer group, no automatic offset store (offsets are stored
/// only after the output's ack), automatic commit of stored offsets.
pub fn consumer_config(s: &Settings) -> ClientConfig {
    let mut c = base(s);
    c.set("auto.offset.reset", "earliest");
    for (k, v) in &s.kafka.consumer_properties {
        c.set(kafka_property_name(k), v);
    }
    c.set("group.id", &s.kafka.group_id);
    if s.learning.enabled && !s.learning.raw_label_topic.is_empty() {
        // The range assignor gives partition p of every subscribed topic with the same
        // partition count to the same member: the raw label topic is co-partitioned
        // with the input, so a label reaches the replica that scored its record.
        c.set("partition.assignment.strategy", "range");
    }
    c.set("enable.auto.offset.store", "false");
    c.set("enable.auto.commit", "true");
    c.set("auto.commit.interval.ms", s.delivery.commit_interval_ms.to_string());
    c.set("enable.partition.eof", "false");
    c
}

/// The learned-label reader: partitions assigned by the service itself (no
/// group membership, nothing committed: positions live in snapshots), with
/// end-of-partition events so the learner knows when it has caught up.
pub fn label_consumer_config(s: &Settings) -> ClientConfig {
    let mut c = base(s);
    c.set("auto.offset.reset", "earliest");
    for (k, v) in &s.kafka.consumer_properties {
        c.set(kafka_property_name(k), v);
    }
    c.set("client.id", "sieveline-labels");
    c.set("group.id", format!("{}.label-reader", s.kafka.group_id));
    c.set("enable.auto.commit", "false");
    c.set("enable.auto.offset.store", "false");
    c.set("enable.partition.eof", "true");
    c
}

/// Producer: idempotent (acks=all, ordered retries). Keys are hashed with
/// murmur2 like the Java clients (librdkafka's default hash differs), so a
/// label keyed by record id lands where other clients would put it; a
/// `partitioner` in producer_properties overrides this.
pub fn producer_config(s: &Settings) -> ClientConfig {
    let mut c = base(s);
    c.set("linger.ms", "5");
    c.set("partitioner", "murmur2_random");
    for (k, v) in &s.kafka.producer_properties {
        c.set(kafka_property_name(k), v);
    }
    c.set("enable.idempotence", "true");
    c
}

/// Admin client for topic creation: the shared properties only.
pub fn admin_config(s: &Settings) -> ClientConfig {
    base(s)
}

fn base(s: &Settings) -> ClientConfig {
    let mut c = ClientConfig::new();
    c.set("bootstrap.servers", &s.kafka.bootstrap_servers);
    c.set("client.id", "sieveline");
    for (k, v) in &s.kafka.properties {
        c.set(kafka_property_name(k), v);
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pass_through_and_guarantees() {
        let mut s = Settings::defaults();
        s.kafka.properties.insert("security.protocol".into(), "ssl".into());
        s.kafka.properties.insert("session_timeout_ms".into(), "6000".into());
        let c = consumer_config(&s);
        assert_eq!(c.get("security.protocol"), Some("ssl"));
        assert_eq!(c.get("session.timeout.ms"), Some("6000"));
        assert_eq!(c.get("enable.auto.offset.store"), Some("false"));
        let p = producer_config(&s);
        assert_eq!(p.get("enable.idempotence"), Some("true"));
        assert_eq!(p.get("partitioner"), Some("murmur2_random"));
        let l = label_consumer_config(&s);
        assert_eq!(l.get("enable.partition.eof"), Some("true"));
        assert_eq!(l.get("enable.auto.commit"), Some("false"));
        assert_eq!(p.get("security.protocol"), Some("ssl"));
    }
}
