//! `sieveline check-config`, the pre-deploy check: every kind of bad settings file is refused with the message docs/operations.md documents and the documented exit code; with `--connect`, missing topics are reported against the real broker (`SIEVELINE_TEST_BROKERS`; missing is a failure) and ACL refusals against a broker of this test's own that runs Kafka's StandardAuthorizer.
//!
//! Index — what each test guards:
//! 1. `each_kind_of_bad_settings_file_is_refused_with_its_documented_message` — unreadable file, TOML syntax, unknown key (file and environment), wrong type, bad value, reserved Kafka property, open admin bind without a token, bad rules file, missing / foreign / other-analyzer model: exit code and message, and the message is in the runbook.
//! 2. `valid_settings_list_the_topics_from_settings_and_model` — exit 0; the topic list is `Settings::kafka_topics` over the model's classes.
//! 3. `connect_reports_partitions_and_a_missing_topic_on_the_real_broker` — partition counts, a missing class topic named with its fix (exit 2), all present (exit 0), unreachable brokers (exit 1).
//! 4. `connect_reports_acl_refusals_for_topic_and_group` — Describe denied on a topic and on the group: both reported by name with the Kafka error (exit 2).

use crate::common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use common::data::{train_model, CLASSES};
use common::kafka::create_topics;
use common::{brokers, test_dir, unique_suffix};

fn check(config: &Path, extra: &[&str], env: &[(&str, &str)]) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sieveline"));
    c.arg("--config").arg(config).arg("check-config").args(extra);
    for (k, v) in env {
        c.env(k, v);
    }
    c.output().expect("run sieveline check-config")
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn runbook() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/operations.md")).expect("docs/operations.md")
}

/// Settings for a Kafka deployment whose topics carry `prefix`.
fn kafka_settings(brokers: &str, prefix: &str, model: &Path) -> String {
    format!(
        r#"[service]
model = "{model}"
[source]
kind = "kafka"
topics = ["{prefix}.in"]
[sink]
kind = "kafka"
[kafka]
bootstrap_servers = "{brokers}"
group_id = "{prefix}-group"
[routing]
topic_template = "{prefix}.routed.{{class}}"
review_topic = "{prefix}.review"
[dead_letter]
topic = "{prefix}.dead"
"#,
        model = model.display()
    )
}

#[test]
fn each_kind_of_bad_settings_file_is_refused_with_its_documented_message() {
    let dir = test_dir("check-bad");
    let model = train_model(&dir);
    let doc = runbook();
    let foreign = write(&dir, "foreign.svm", "not a model at all, just text of the same length as nothing");
    let bad_rules = write(&dir, "rules.toml", "[[rule]]\nid = \"r1\"\nclass = \"billing\"\naction = \"assign\"\n  [[rule.when]]\n  any = []\n");
    let rules_at = format!("{}:6: rule \"r1\": `any` is an empty list", bad_rules.display());
    let m = model.display().to_string();
    // (what, settings text or None for a missing file, environment, exit code,
    //  fragments of the message, the fixed text the runbook documents for it)
    type Case<'a> = (&'a str, Option<String>, Vec<(&'a str, &'a str)>, i32, Vec<&'a str>, &'a str);
    let shape = "settings do not have the expected shape";
    let invalid = "is not allowed: expected";
    let cases: Vec<Case> = vec![
        ("unreadable file", None, vec![], 2, vec!["cannot read settings file"], "cannot read settings file"),
        ("TOML syntax", Some("[model\nalpha = 1\n".into()), vec![], 2, vec!["is not valid TOML"], "is not valid TOML"),
        ("unknown key", Some("[model]\nalpah = 0.5\n".into()), vec![], 2, vec![shape, "unknown field `alpah`"], shape),
        ("unknown section", Some("[modle]\nalpha = 0.5\n".into()), vec![], 2, vec![shape, "unknown field `modle`"], shape),
        ("unknown key from the environment", Some(String::new()), vec![("SIEVELINE__MODEL__ALHPA", "0.5")], 2, vec![shape, "alhpa"], shape),
        ("wrong type", Some("[model]\nalpha = \"high\"\n".into()), vec![], 2, vec![shape, "invalid type"], shape),
        ("bad value", Some("[model]\nalpha = -1.0\n".into()), vec![], 2, vec!["setting model.alpha = \"-1\" is not allowed: expected"], invalid),
        ("bad choice", Some("[source]\nkind = \"socket\"\n".into()), vec![], 2, vec!["is not allowed: expected one of stdin, file, kafka"], "expected one of"),
        (
            "reserved Kafka property",
            Some("[kafka]\nproperties = { \"enable.auto.commit\" = \"false\" }\n".into()),
            vec![],
            2,
            vec!["setting kafka.properties.enable.auto.commit", "the service sets this property itself"],
            "the service sets this property itself",
        ),
        (
            "open admin bind without a token",
            Some("[admin]\nbind = \"0.0.0.0:9464\"\n".into()),
            vec![],
            2,
            vec!["setting admin.token", "a bearer token when admin.bind is not a loopback address"],
            "a bearer token when admin.bind is not a loopback address",
        ),
        ("bad rules file", Some(format!("[rules]\npath = \"{}\"\n", bad_rules.display())), vec![], 2, vec![rules_at.as_str()], "file:line: rule"),
        ("missing rules file", Some("[rules]\npath = \"/nonexistent/rules.toml\"\n".into()), vec![], 2, vec!["cannot read rules file /nonexistent/rules.toml"], "cannot read rules file"),
        ("missing model file", Some("[service]\nmodel = \"/nonexistent/model.svm\"\n".into()), vec![], 4, vec!["cannot read model file /nonexistent/model.svm"], "cannot read model file"),
        ("not a model file", Some(format!("[service]\nmodel = \"{}\"\n", foreign.display())), vec![], 4, vec!["is not a sieveline model file"], "is not a sieveline model file"),
        (
            "model of other analyzer settings",
            Some(format!("[service]\nmodel = \"{m}\"\n[analyzer]\nbigrams = true\n")),
            vec![],
            4,
            vec!["was built with other analyzer settings", "bigrams"],
            "was built with other analyzer settings",
        ),
    ];
    for (i, (what, text, env, code, fragments, documented)) in cases.iter().enumerate() {
        let path = match text {
            Some(t) => write(&dir, &format!("case-{i}.toml"), t),
            None => dir.join("no-such-settings.toml"),
        };
        let out = check(&path, &[], env);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(*code), "{what}: exit code; stderr: {err}");
        for f in fragments {
            assert!(err.contains(f), "{what}: stderr lacks {f:?}: {err}");
        }
        assert!(doc.contains(documented), "{what}: docs/operations.md does not document {documented:?}");
        assert!(out.stdout.is_empty(), "{what}: nothing is reported as checked");
    }
}

#[test]
fn valid_settings_list_the_topics_from_settings_and_model() {
    let dir = test_dir("check-ok");
    let model = train_model(&dir);
    let cfg = write(&dir, "ok.toml", &kafka_settings("127.0.0.1:1", "ok", &model));
    let out = check(&cfg, &["--json"], &[]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(r["settings"], "ok");
    let names: Vec<&str> = r["topics"].as_array().unwrap().iter().map(|t| t["name"].as_str().unwrap()).collect();
    let mut want = vec!["ok.in".to_string(), "ok.review".into(), "ok.dead".into()];
    want.extend(CLASSES.iter().map(|c| format!("ok.routed.{c}")));
    assert_eq!(names, want);
    assert_eq!(r["model"]["classes"], serde_json::json!(CLASSES));
    assert!(r["cluster"].is_null(), "no broker contact without --connect");
    // The same list from the library function the command uses.
    let s = sieveline::settings::Settings::load_with_env(Some(&cfg), std::iter::empty()).unwrap();
    let classes: Vec<String> = CLASSES.iter().map(|c| c.to_string()).collect();
    let lib: Vec<String> = s.kafka_topics(&classes).into_iter().map(|t| t.name).collect();
    assert_eq!(lib, want);
}

#[test]
fn connect_reports_partitions_and_a_missing_topic_on_the_real_broker() {
    let brokers = brokers();
    let dir = test_dir("check-connect");
    let model = train_model(&dir);
    let prefix = format!("cc.{}", unique_suffix());
    let cfg = write(&dir, "kafka.toml", &kafka_settings(&brokers, &prefix, &model));
    let input = format!("{prefix}.in");
    let (review, dead) = (format!("{prefix}.review"), format!("{prefix}.dead"));
    let class_topics: Vec<String> = CLASSES.iter().map(|c| format!("{prefix}.routed.{c}")).collect();
    // Every topic but the last class topic.
    let mut topics: Vec<(&str, i32)> = vec![(&input, 6), (&review, 2), (&dead, 1)];
    topics.extend(class_topics[..CLASSES.len() - 1].iter().map(|t| (t.as_str(), 3)));
    create_topics(&brokers, &topics);

    let out = check(&cfg, &["--connect", "--json"], &[]);
    assert_eq!(out.status.code(), Some(2), "a missing topic is the operator's to fix: {}", String::from_utf8_lossy(&out.stderr));
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let find = |name: &str| r["cluster"]["topics"].as_array().unwrap().iter().find(|t| t["name"] == name).cloned().unwrap();
    assert_eq!(find(&input)["partitions"], 6);
    assert_eq!(find(&input)["state"], "ok");
    assert_eq!(find(&review)["partitions"], 2);
    assert_eq!(find(&dead)["partitions"], 1);
    let missing = class_topics.last().unwrap();
    assert_eq!(find(missing)["state"], "missing");
    let problems: Vec<&str> = r["problems"].as_array().unwrap().iter().map(|p| p.as_str().unwrap()).collect();
    assert_eq!(problems.len(), 1, "{problems:?}");
    assert!(problems[0].contains(missing.as_str()) && problems[0].contains(CLASSES.last().unwrap()), "{problems:?}");
    assert!(problems[0].contains("routing.create_missing_topics"), "names the fix: {problems:?}");
    assert_eq!(r["cluster"]["group"]["committed"], 0, "a new group has no committed offsets");
    // The text report names it too, and the error line says how many problems.
    let out = check(&cfg, &["--connect"], &[]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains(missing.as_str()) && text.contains("MISSING"), "{text}");
    assert!(String::from_utf8_lossy(&out.stderr).contains("1 problem(s) with the Kafka cluster"));

    // With the topic created, the check passes.
    create_topics(&brokers, &[(missing.as_str(), 3)]);
    let out = check(&cfg, &["--connect"], &[]);
    assert!(out.status.success(), "{}\n{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));

    // Brokers that do not answer: exit 1 and the client's own reason.
    let out = check(&cfg, &["--connect", "--timeout-ms", "2000"], &[("SIEVELINE__KAFKA__BOOTSTRAP_SERVERS", "127.0.0.1:1")]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(err.contains("cannot reach the Kafka brokers 127.0.0.1:1") && err.contains("Connection refused"), "{err}");
    assert!(runbook().contains("cannot reach the Kafka brokers"));
}

#[test]
fn connect_reports_acl_refusals_for_topic_and_group() {
    let _ = brokers(); // the variable must be set even though this test brings its own broker
    let dir = test_dir("check-acl");
    let broker = AclBroker::start(&dir.join("broker"));
    let model = train_model(&dir);
    let prefix = "acl";
    let cfg = write(&dir, "acl.toml", &kafka_settings(&broker.bootstrap, prefix, &model));
    let mut topics: Vec<String> = vec!["acl.in".into(), "acl.review".into(), "acl.dead".into()];
    topics.extend(CLASSES.iter().map(|c| format!("acl.routed.{c}")));
    create_topics(&broker.bootstrap, &topics.iter().map(|t| (t.as_str(), 2)).collect::<Vec<_>>());
    // This client (User:ANONYMOUS on the plaintext listener) may not describe one topic or the group.
    broker.acls(&["--add", "--deny-principal", "User:ANONYMOUS", "--operation", "Describe", "--topic", "acl.review", "--group", "acl-group"]);

    let out = check(&cfg, &["--connect", "--json", "--timeout-ms", "3000"], &[]);
    assert_eq!(out.status.code(), Some(2), "{}", String::from_utf8_lossy(&out.stderr));
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let review = r["cluster"]["topics"].as_array().unwrap().iter().find(|t| t["name"] == "acl.review").unwrap();
    assert_eq!(review["state"], "not_authorized");
    assert_eq!(r["cluster"]["group"]["state"], "not_authorized");
    let problems: Vec<&str> = r["problems"].as_array().unwrap().iter().map(|p| p.as_str().unwrap()).collect();
    assert_eq!(problems.len(), 2, "{problems:?}");
    assert!(problems[0].contains("acl.review") && problems[0].contains("TOPIC_AUTHORIZATION_FAILED") && problems[0].contains("Describe and Write"), "{problems:?}");
    assert!(problems[1].contains("acl-group") && problems[1].contains("GROUP_AUTHORIZATION_FAILED"), "{problems:?}");
    let doc = runbook();
    assert!(doc.contains("TOPIC_AUTHORIZATION_FAILED") && doc.contains("GROUP_AUTHORIZATION_FAILED"), "the runbook explains both");
    // Every other topic is reported with its partitions.
    for t in r["cluster"]["topics"].as_array().unwrap().iter().filter(|t| t["name"] != "acl.review") {
        assert_eq!(t["partitions"], 2, "{t}");
    }
}

/// A broker of this test's own with Kafka's StandardAuthorizer (everyone allowed where no ACL
/// says otherwise), stopped on drop.
struct AclBroker {
    dir: PathBuf,
    bootstrap: String,
}

impl AclBroker {
    fn script() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/test-broker/broker.sh")
    }

    fn start(dir: &Path) -> AclBroker {
        std::fs::create_dir_all(dir).unwrap();
        let out = Command::new("bash")
            .arg(Self::script())
            .arg("start")
            .arg(dir)
            .env(
                "SIEVELINE_BROKER_EXTRA_PROPS",
                "authorizer.class.name=org.apache.kafka.metadata.authorizer.StandardAuthorizer\nallow.everyone.if.no.acl.found=true",
            )
            .output()
            .unwrap();
        assert!(out.status.success(), "broker start failed: {}", String::from_utf8_lossy(&out.stderr));
        let bootstrap = String::from_utf8_lossy(&out.stdout).lines().last().unwrap_or_default().trim().to_string();
        AclBroker { dir: dir.to_path_buf(), bootstrap }
    }

    fn acls(&self, args: &[&str]) {
        let out = Command::new("bash").arg(Self::script()).arg("acls").arg(&self.dir).args(args).output().unwrap();
        assert!(out.status.success(), "ACL tool failed: {}", String::from_utf8_lossy(&out.stderr));
    }
}

impl Drop for AclBroker {
    fn drop(&mut self) {
        let _ = Command::new("bash").arg(Self::script()).arg("stop").arg(&self.dir).status();
    }
}
