//! The Dockerfile's steps run outside a container engine (none runs here): `deploy/docker/dry-run.py` runs the build stage's RUN lines (the same dependency script and cargo build), stages the runtime image's files and checks what its RUN lines must achieve; then the image's entry command runs from the staging folder with the Kubernetes ConfigMap's settings, as the image's non-root user, against the real broker (`SIEVELINE_TEST_BROKERS`; missing is a failure).
//!
//! Index — what each test guards:
//! 1. `image_build_steps_and_entry_command_run_and_serve` — the build steps succeed, the runtime stage's packages cover every library the binary links, the entry command starts the service as a non-root user, it becomes ready, routes records, guards `/assignment` with the Secret's token (input and co-partitioned raw label partitions), exits 0 on SIGTERM within the pod's grace period and leaves a snapshot on the snapshots volume.

use crate::common;
use crate::deploy_support;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::data::{self, train_model, CLASSES};
use common::kafka::{input_positions, produce_all, Collector};
use common::process::Scenario;
use common::{brokers, free_port, http, test_dir};
use deploy_support::{repo, K8s};

#[test]
fn image_build_steps_and_entry_command_run_and_serve() {
    let brokers = brokers();
    let dir = test_dir("docker");
    let staging = dir.join("image-root");

    // 1. The Dockerfile's steps.
    let out = Command::new("python3")
        .arg(repo().join("deploy/docker/dry-run.py"))
        .arg("--staging")
        .arg(&staging)
        .output()
        .expect("python3 runs deploy/docker/dry-run.py");
    assert!(out.status.success(), "dry run failed:\n{}", String::from_utf8_lossy(&out.stderr));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("dry-run report JSON");
    let ran: Vec<&str> = report["ran"].as_array().unwrap().iter().map(|v| v.as_str().unwrap()).collect();
    assert!(ran.iter().any(|r| r.starts_with("cargo build --release --locked")), "the cargo build ran: {ran:?}");
    assert!(ran.iter().any(|r| r.contains("scripts/install-deps.sh build")), "the dependency script ran: {ran:?}");
    assert!(!report["not_run"].as_array().unwrap().is_empty(), "runtime RUN lines are reported as not run");
    assert_eq!(report["libraries"]["libssl.so.3"], "libssl3", "{}", report["libraries"]);
    let packages: Vec<&str> = report["runtime_packages"].as_array().unwrap().iter().map(|v| v.as_str().unwrap()).collect();
    assert!(packages.contains(&"libssl3") && packages.contains(&"ca-certificates"), "{packages:?}");
    let uid = report["uid"].as_u64().unwrap() as u32;
    let gid = report["gid"].as_u64().unwrap() as u32;
    assert_ne!(uid, 0);

    // The staged binary is the one cargo built.
    let version = |bin: &std::path::Path| Command::new(bin).arg("--version").output().unwrap().stdout;
    let binary = std::path::PathBuf::from(report["binary"].as_str().unwrap());
    assert_eq!(version(&binary), version(std::path::Path::new(env!("CARGO_BIN_EXE_sieveline"))));

    // 2. The image's file system: the ConfigMap's settings at the --config path, the model on its volume.
    let k = K8s::load();
    let (settings_src, _) = k.settings_file();
    let entry: Vec<String> = serde_json::from_value(report["entry"].clone()).unwrap();
    let config = &entry[entry.iter().position(|a| a == "--config").unwrap() + 1];
    let staged = |p: &str| staging.join(p.trim_start_matches('/'));
    std::fs::create_dir_all(staged(config).parent().unwrap()).unwrap();
    std::fs::copy(&settings_src, staged(config)).unwrap();
    let pod_model = "/var/lib/sieveline/models/model.svm";
    let settings_text = std::fs::read_to_string(&settings_src).unwrap();
    assert!(settings_text.contains(pod_model), "the ConfigMap names the model on the models volume");
    std::fs::create_dir_all(staged(pod_model).parent().unwrap()).unwrap();
    std::fs::copy(train_model(&dir), staged(pod_model)).unwrap();

    // 3. Topics of this run (names are site-specific, so they come from the environment here).
    let sc = Scenario::new("docker", &brokers, &staged(pod_model), &dir, 2);
    let outs = sc.create_topics(CLASSES);
    // The ConfigMap turns learning on: its label topics (the raw one co-partitioned with the
    // input) and the snapshot on the snapshots volume, writable by the image's user.
    let (label_topic, raw_label_topic) = (format!("{}.labels", sc.prefix), format!("{}.labels.raw", sc.prefix));
    common::kafka::create_topics(&brokers, &[(label_topic.as_str(), 1), (raw_label_topic.as_str(), 2)]);
    let pod_snapshot = "/var/lib/sieveline/snapshots/model.svm";
    assert!(settings_text.contains(pod_snapshot), "the ConfigMap keeps snapshots on the snapshots volume");
    let snapshot_dir = staged(pod_snapshot).parent().unwrap().to_path_buf();
    std::fs::create_dir_all(&snapshot_dir).unwrap();
    let port = free_port();
    let token = "token-from-the-secret";
    let mut env: Vec<(String, String)> = report["env"].as_object().unwrap().iter().map(|(k, v)| (k.clone(), v.as_str().unwrap().to_string())).collect();
    for (name, value) in k.env() {
        // The test broker speaks plaintext without credentials.
        let security = ["SECURITY_PROTOCOL", "SASL_", "SSL_"].iter().any(|p| name.contains(&format!("__PROPERTIES__{p}")));
        if security {
            continue;
        }
        let value = if value.starts_with("field:") { "sieveline-test-pod-0".to_string() } else { value };
        env.push((name, value));
    }
    let site: Vec<(String, String)> = vec![
        ("SIEVELINE__KAFKA__BOOTSTRAP_SERVERS".into(), brokers.clone()),
        ("SIEVELINE__KAFKA__GROUP_ID".into(), sc.group.clone()),
        ("SIEVELINE__SOURCE__TOPICS".into(), sc.input.clone()),
        ("SIEVELINE__ROUTING__TOPIC_TEMPLATE".into(), format!("{}.routed.{{class}}", sc.prefix)),
        ("SIEVELINE__ROUTING__REVIEW_TOPIC".into(), sc.review_topic()),
        ("SIEVELINE__DEAD_LETTER__TOPIC".into(), sc.dead_topic()),
        ("SIEVELINE__SERVICE__MODEL".into(), staged(pod_model).display().to_string()),
        ("SIEVELINE__LEARNING__LABEL_TOPIC".into(), label_topic.clone()),
        ("SIEVELINE__LEARNING__RAW_LABEL_TOPIC".into(), raw_label_topic.clone()),
        ("SIEVELINE__SNAPSHOT__PATH".into(), staged(pod_snapshot).display().to_string()),
        ("SIEVELINE__ADMIN__BIND".into(), format!("127.0.0.1:{port}")),
        ("SIEVELINE__ADMIN__TOKEN".into(), token.into()),
        ("SIEVELINE__KAFKA__PROPERTIES__SESSION_TIMEOUT_MS".into(), "6000".into()),
    ];
    env.retain(|(n, _)| !site.iter().any(|(s, _)| s == n));
    env.extend(site);

    // 4. The entry command, as the image's user (setpriv when the test runs as root; any
    // other user running the test is already not root).
    let mut argv: Vec<String> = entry.iter().map(|a| if a.starts_with('/') { staged(a).display().to_string() } else { a.clone() }).collect();
    let root = effective_uid() == 0;
    if root {
        // What the image's `chown -R 10001:10001 /var/lib/sieveline` gives the volume.
        std::os::unix::fs::chown(&snapshot_dir, Some(uid), Some(gid)).unwrap();
        let mut p = vec!["setpriv".to_string(), format!("--reuid={uid}"), format!("--regid={gid}"), "--clear-groups".into(), "--".into()];
        p.extend(argv);
        argv = p;
    }
    let workdir = staged(report["workdir"].as_str().unwrap());
    let log = dir.join("entry.log");
    let logf = std::fs::File::create(&log).unwrap();
    let child = Command::new(&argv[0])
        .args(&argv[1..])
        .current_dir(&workdir)
        .env_clear()
        .env("PATH", "/usr/local/sbin:/usr/local/bin:/usr/sbin:/usr/bin:/sbin:/bin")
        .envs(env)
        .stdin(Stdio::null())
        .stdout(logf.try_clone().unwrap())
        .stderr(logf)
        .spawn()
        .expect("run the entry command");
    let mut child = KillOnDrop(child);
    let log_text = || std::fs::read_to_string(&log).unwrap_or_default();
    common::wait_for(Duration::from_secs(60), "the entry command is ready", || {
        if let Ok(Some(st)) = child.try_wait() {
            panic!("entry command exited ({st}):\n{}", log_text());
        }
        matches!(http(port, "GET", "/readyz", None, b""), Some((200, _))).then_some(())
    });
    let status = std::fs::read_to_string(format!("/proc/{}/status", child.id())).unwrap();
    let real_uid: u32 = status.lines().find(|l| l.starts_with("Uid:")).unwrap().split_whitespace().nth(1).unwrap().parse().unwrap();
    assert_ne!(real_uid, 0, "the service runs as a non-root user");
    if root {
        assert_eq!(real_uid, uid, "as the image's USER");
    }

    let inputs = data::stream(300, 20, Some(50), 11);
    produce_all(&brokers, &sc.input, &inputs);
    let expected = input_positions(&brokers, &sc.input, 2);
    let mut col = Collector::new(&brokers, &outs);
    assert!(col.until_covered(&expected, Duration::from_secs(60)), "every record routed; log:\n{}", log_text());
    assert_eq!(http(port, "GET", "/assignment", None, b"").map(|r| r.0), Some(401), "guarded without the token");
    let (st, body) = http(port, "GET", "/assignment", Some(token), b"").unwrap();
    assert_eq!(st, 200);
    let a: serde_json::Value = serde_json::from_str(&body).unwrap();
    // The input's two partitions, and the raw label topic's matching two (co-partitioned).
    assert_eq!(a["partitions"][&sc.input], serde_json::json!([0, 1]), "{body}");
    assert_eq!(a["partitions"][&raw_label_topic], serde_json::json!([0, 1]), "{body}");
    assert_eq!(a["count"], 4, "{body}");

    let grace = Duration::from_secs(k.deployment()["spec"]["template"]["spec"]["terminationGracePeriodSeconds"].as_u64().unwrap());
    let t0 = Instant::now();
    assert!(Command::new("kill").arg("-TERM").arg(child.id().to_string()).status().unwrap().success());
    let st = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        assert!(t0.elapsed() < grace, "not stopped within the pod's grace period {grace:?}");
        std::thread::sleep(Duration::from_millis(20));
    };
    assert!(st.success(), "exit status {st}; log:\n{}", log_text());
    let snapshot = std::fs::read(staged(pod_snapshot)).unwrap_or_else(|e| panic!("a shutdown snapshot on the snapshots volume: {e}; log:\n{}", log_text()));
    assert!(snapshot.len() > 64, "the snapshot holds a model ({} bytes)", snapshot.len());
    eprintln!("entry command stopped {:?} after SIGTERM", t0.elapsed());
}

/// The effective user id of this test process, from /proc (no libc binding needed).
fn effective_uid() -> u32 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap();
    status.lines().find(|l| l.starts_with("Uid:")).unwrap().split_whitespace().nth(2).unwrap().parse().unwrap()
}

/// The entry command's process, killed if the test fails before it stops it.
struct KillOnDrop(std::process::Child);

impl std::ops::Deref for KillOnDrop {
    type Target = std::process::Child;
    fn deref(&self) -> &Self::Target {
        &self.0
    }
}

impl std::ops::DerefMut for KillOnDrop {
    fn deref_mut(&mut self) -> &mut Self::Target {
        &mut self.0
    }
}

impl Drop for KillOnDrop {
    fn drop(&mut self) {
        if let Ok(None) = self.0.try_wait() {
            let _ = self.0.kill();
            let _ = self.0.wait();
        }
    }
}
