//! `sieveline check-config`: the pre-deploy check. The settings were already loaded and validated (a bad file never gets here: exit 2 with the settings message); this checks what they refer to — the rules file, the model file — and, with `--connect`, the brokers: every topic from `Settings::kafka_topics`, its partitions and whether this client may see it, and the consumer group.

use std::path::PathBuf;
use std::time::Duration;

use anyhow::{Context, Result};
use serde_json::json;
use thiserror::Error;

use crate::cli::CheckConfigArgs;
use crate::io::kafka::check::{check_cluster, ClusterCheck, GroupCheck, TopicState};
use crate::model::snapshot;
use crate::rules;
use crate::settings::{Settings, SinkKind, SourceKind};

/// How a check failed beyond the typed settings, rules and model errors (which keep their own exit codes).
#[derive(Debug, Error)]
pub enum CheckError {
    #[error("{count} problem(s) with the Kafka cluster for these settings (listed above)")]
    Problems { count: usize },
    #[error("cannot reach the Kafka brokers {bootstrap} with the configured client properties: {reason}")]
    Unreachable { bootstrap: String, reason: String },
}

/// Exit codes of check failures: problems with topics or ACLs are the operator's to fix (2);
/// brokers that cannot be reached are a runtime failure (1).
pub fn exit_code_of(e: &(dyn std::error::Error + 'static)) -> Option<u8> {
    match e.downcast_ref::<CheckError>()? {
        CheckError::Problems { .. } => Some(2),
        CheckError::Unreachable { .. } => Some(1),
    }
}

pub fn run(mut settings: Settings, args: &CheckConfigArgs) -> Result<()> {
    if let Some(m) = &args.model {
        settings.service.model = m.display().to_string();
    }
    let mut notes: Vec<String> = Vec::new();
    let mut classes: Vec<String> = Vec::new();

    // Rules file: refused whole with file, line and rule (exit 2).
    let rules_summary = if settings.rules.path.is_empty() {
        None
    } else {
        let set = rules::load_for(&settings, &PathBuf::from(&settings.rules.path))?;
        classes.extend(set.classes().iter().cloned());
        Some(json!({"file": settings.rules.path, "rules": set.len(), "classes": set.classes()}))
    };

    // Model file: refused whole if damaged or built with other analyzer settings (exit 4).
    let model_summary = if settings.service.model.is_empty() {
        if settings.source.kind == SourceKind::Kafka {
            notes.push("service.model is empty: `sieveline run` needs --model FILE".into());
        }
        None
    } else {
        let path = PathBuf::from(&settings.service.model);
        let loaded = snapshot::read(&path, Some(&settings.analyzer)).context("service.model is refused")?;
        for c in loaded.model.classes() {
            if !classes.contains(c) {
                classes.push(c.clone());
            }
        }
        Some(json!({
            "file": settings.service.model,
            "model_version": loaded.meta.model_version,
            "classes": loaded.model.classes(),
            "documents": loaded.model.documents(),
        }))
    };
    if settings.sink.kind == SinkKind::Kafka && model_summary.is_none() && rules_summary.is_none() {
        notes.push("class topics not checked: no model (--model or service.model) and no rules file to take classes from".into());
    }

    let needs = settings.kafka_topics(&classes);
    let cluster = if args.connect {
        if needs.is_empty() {
            notes.push("--connect: these settings use no Kafka topic (source and sink are not kafka)".into());
            None
        } else {
            let timeout = Duration::from_millis(args.timeout_ms);
            let c = check_cluster(&settings, &needs, timeout).map_err(|e| CheckError::Unreachable {
                bootstrap: settings.kafka.bootstrap_servers.clone(),
                reason: e.to_string(),
            })?;
            Some(c)
        }
    } else {
        if !needs.is_empty() {
            notes.push(format!("{} Kafka topics not checked: add --connect to check them on the brokers", needs.len()));
        }
        None
    };
    let mut problems = cluster.as_ref().map(ClusterCheck::problems).unwrap_or_default();
    if let Some(c) = &cluster {
        problems.extend(co_partitioning_problem(&settings, c));
    }

    if args.json {
        let doc = json!({
            "settings": "ok",
            "source": settings.source.kind.as_str(),
            "sink": settings.sink.kind.as_str(),
            "admin_bind": if settings.admin.enabled { Some(&settings.admin.bind) } else { None },
            "rules": rules_summary,
            "model": model_summary,
            "topics": needs.iter().map(|t| json!({"name": t.name, "role": t.role, "class": t.class, "must_exist": t.must_exist})).collect::<Vec<_>>(),
            "cluster": cluster,
            "problems": problems,
            "notes": notes,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
    } else {
        print_text(&settings, rules_summary.as_ref(), model_summary.as_ref(), cluster.as_ref(), &problems, &notes);
    }
    if problems.is_empty() {
        Ok(())
    } else {
        Err(CheckError::Problems { count: problems.len() }.into())
    }
}

/// Id-only labels reach the replica that scored their record only if the raw
/// label topic has exactly as many partitions as every source topic.
fn co_partitioning_problem(s: &Settings, c: &ClusterCheck) -> Option<String> {
    let raw = &s.learning.raw_label_topic;
    if !s.learning.enabled || raw.is_empty() {
        return None;
    }
    let parts = |name: &str| {
        c.topics.iter().find(|t| t.name == name).and_then(|t| match t.state {
            TopicState::Ok { partitions, .. } => Some(partitions),
            _ => None,
        })
    };
    let raw_parts = parts(raw)?;
    let unequal: Vec<String> = s
        .source
        .topics
        .iter()
        .filter_map(|t| parts(t).filter(|p| *p != raw_parts).map(|p| format!("{t} has {p}")))
        .collect();
    (!unequal.is_empty()).then(|| {
        format!(
            "raw label topic {raw} has {raw_parts} partitions but {}: id-only labels would reach the wrong replica (co-partition them: same count, same key)",
            unequal.join(", ")
        )
    })
}

fn print_text(
    s: &Settings,
    rules: Option<&serde_json::Value>,
    model: Option<&serde_json::Value>,
    cluster: Option<&ClusterCheck>,
    problems: &[String],
    notes: &[String],
) {
    println!("settings: ok");
    println!("  source {}, sink {}", s.source.kind.as_str(), s.sink.kind.as_str());
    if s.admin.enabled {
        println!(
            "  admin endpoint {} (token {})",
            s.admin.bind,
            if s.admin.token.is_empty() { "not set" } else { "set" }
        );
    }
    println!(
        "  drain limit {} ms, revoke drain {} ms, in-flight bound {} per partition",
        s.service.drain_timeout_ms, s.delivery.revoke_drain_ms, s.delivery.max_in_flight_per_partition
    );
    match rules {
        Some(r) => println!("rules: {} ok, {} rules for {} classes", r["file"].as_str().unwrap_or(""), r["rules"], r["classes"].as_array().map_or(0, Vec::len)),
        None => println!("rules: none"),
    }
    match model {
        Some(m) => println!(
            "model: {} ok, version {}, {} classes, {} documents",
            m["file"].as_str().unwrap_or(""),
            m["model_version"].as_str().unwrap_or(""),
            m["classes"].as_array().map_or(0, Vec::len),
            m["documents"]
        ),
        None => println!("model: none"),
    }
    if let Some(c) = cluster {
        println!("kafka: {} reachable, {} broker(s) in the cluster", c.bootstrap, c.brokers);
        println!("  {:<40} {:<26} {:<6} {:>10}  status", "topic", "role", "access", "partitions");
        for t in &c.topics {
            let role = match &t.class {
                Some(class) => format!("class {class}"),
                None => t.role.to_string(),
            };
            let (parts, status) = match &t.state {
                TopicState::Ok { partitions, leaderless: 0 } => (partitions.to_string(), "ok".to_string()),
                TopicState::Ok { partitions, leaderless } => (partitions.to_string(), format!("{leaderless} without leader")),
                TopicState::Missing if !t.must_exist => ("-".into(), "missing (the service creates it)".into()),
                TopicState::Missing => ("-".into(), "MISSING".into()),
                TopicState::NotAuthorized => ("-".into(), "NOT AUTHORIZED".into()),
                TopicState::Error { code } => ("-".into(), format!("ERROR {code}")),
            };
            println!("  {:<40} {:<26} {:<6} {:>10}  {}", t.name, role, t.access, parts, status);
        }
        let source_parts: usize = c
            .topics
            .iter()
            .filter(|t| t.role == "source")
            .map(|t| match t.state {
                TopicState::Ok { partitions, .. } => partitions,
                _ => 0,
            })
            .sum();
        if source_parts > 0 {
            println!("  source partitions: {source_parts}; at most {source_parts} replicas of group {} get work", s.kafka.group_id);
        }
        match &c.group {
            Some(GroupCheck::Described { id, committed, partitions, backlog, members }) => println!(
                "  consumer group {id}: {members} member(s) now; committed offsets on {committed} of {partitions} source partitions; backlog {backlog} records"
            ),
            Some(other) => println!("  {}", other.problem().unwrap_or_default()),
            None => {}
        }
        println!("  (metadata shows Describe permission only; Read and Write are proven by consuming and producing)");
    }
    for n in notes {
        println!("note: {n}");
    }
    if !problems.is_empty() {
        println!("problems:");
        for p in problems {
            println!("  - {p}");
        }
    }
}
