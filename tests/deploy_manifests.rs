//! The deploy assets agree with the code, so nothing drifts silently: Kubernetes manifests (parsed as YAML by PyYAML, pinned in tests/reference/requirements.txt), the Dockerfile's runtime stage and the systemd unit are checked against the settings (`config/default.toml`, `Settings`) and the admin routes (`sieveline::admin`).
//!
//! Index — what each test guards:
//! 1. `manifests_parse_and_reference_what_exists` — every resource parses as YAML; the ConfigMap, Secrets, claim and volumes the Deployment names exist with the keys it reads.
//! 2. `settings_and_environment_load_as_the_service_loads_them` — the ConfigMap's settings file with the Deployment's environment is valid `Settings`; every `SIEVELINE__…` name in the manifests, the unit and the runbook is a settings key.
//! 3. `ports_probes_and_scrape_target_match_the_admin_endpoint` — container port, EXPOSE, Service and scrape annotations use `admin.bind`'s port; probes and scrape path are the admin routes.
//! 4. `shutdown_user_and_entry_agree_between_image_pod_and_unit` — grace period and TimeoutStopSec above the drain limit; same non-root uid; same entry command and settings path everywhere.
//! 5. `replicas_share_one_group_and_disruptions_leave_coverage` — one consumer group for all replicas, a PodDisruptionBudget selecting the pods, a rolling update that never drops below the replica count.
//! 6. `systemd_unit_is_accepted_by_systemd_analyze` — `systemd-analyze verify` (systemd's own unit checker) finds no unknown key or bad value; restart policy, reload signal and hardening are set.

use crate::deploy_support;

use std::collections::BTreeMap;

use deploy_support::{exec_form, port_of, repo, runtime_instruction, settings_key_exists, K8s};
use sieveline::admin::{PATH_HEALTHZ, PATH_METRICS, PATH_READYZ};
use sieveline::settings::Settings;

/// The settings the pods run with: the ConfigMap's file and the Deployment's environment.
fn pod_settings(k: &K8s) -> Settings {
    let (file, _) = k.settings_file();
    let env: Vec<(String, String)> = k.env().into_iter().filter(|(n, _)| n.starts_with("SIEVELINE__")).collect();
    Settings::load_with_env(Some(&file), env).unwrap_or_else(|e| panic!("the pods' settings are refused: {e}"))
}

/// The systemd unit's [Service] entries (a key may repeat).
fn unit() -> Vec<(String, String, String)> {
    let text = std::fs::read_to_string(repo().join("deploy/systemd/sieveline.service")).unwrap();
    let mut section = String::new();
    let mut out = Vec::new();
    for line in text.lines() {
        let t = line.trim();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        if t.starts_with('[') {
            section = t.trim_matches(|c| c == '[' || c == ']').to_string();
            continue;
        }
        let (k, v) = t.split_once('=').unwrap_or_else(|| panic!("unit line {t:?} is not KEY=VALUE"));
        out.push((section.clone(), k.trim().to_string(), v.trim().to_string()));
    }
    out
}

fn unit_value(key: &str) -> String {
    unit().into_iter().filter(|(s, k, _)| s == "Service" && k == key).map(|x| x.2).next_back().unwrap_or_else(|| panic!("unit has no {key}"))
}

/// systemd time spans as used in the unit: "45s", "2min", "45".
fn seconds(span: &str) -> u64 {
    if let Some(m) = span.strip_suffix("min") {
        m.parse::<u64>().unwrap() * 60
    } else {
        span.trim_end_matches('s').parse().unwrap_or_else(|_| panic!("time span {span:?}"))
    }
}

#[test]
fn manifests_parse_and_reference_what_exists() {
    let k = K8s::load();
    for kind in ["Namespace", "Deployment", "PodDisruptionBudget", "Service", "PersistentVolumeClaim", "Secret"] {
        assert!(k.objects.keys().any(|(kk, _)| kk == kind), "a {kind} in deploy/k8s");
    }
    let (file, key) = k.settings_file();
    assert!(file.exists(), "{} exists", file.display());
    assert_eq!(key, "settings.toml");
    let pod = &k.deployment()["spec"]["template"]["spec"];
    let volumes: BTreeMap<&str, &serde_json::Value> =
        pod["volumes"].as_array().unwrap().iter().map(|v| (v["name"].as_str().unwrap(), v)).collect();
    for m in k.container()["volumeMounts"].as_array().unwrap() {
        assert!(volumes.contains_key(m["name"].as_str().unwrap()), "mount {} has a volume", m["name"]);
    }
    for v in volumes.values() {
        if let Some(cm) = v["configMap"]["name"].as_str() {
            // kustomize rewrites this reference to the generated (hash-suffixed) name.
            assert_eq!(cm, "sieveline-settings", "the Deployment mounts the generated ConfigMap");
        }
        if let Some(s) = v["secret"]["secretName"].as_str() {
            let secret = k.get("Secret", s);
            for item in v["secret"]["items"].as_array().into_iter().flatten() {
                let key = item["key"].as_str().unwrap();
                assert!(secret["stringData"].get(key).is_some(), "Secret {s} has key {key}");
            }
        }
        if let Some(c) = v["persistentVolumeClaim"]["claimName"].as_str() {
            k.get("PersistentVolumeClaim", c);
        }
    }
    for (name, value) in k.env() {
        if let Some(r) = value.strip_prefix("secret:") {
            let (s, key) = r.split_once('/').unwrap();
            assert!(k.get("Secret", s)["stringData"].get(key).is_some(), "{name}: Secret {s} has key {key}");
        }
    }
    assert!(volumes.contains_key("snapshots"), "a volume for model snapshots");
    let snap = k.container()["volumeMounts"].as_array().unwrap().iter().find(|m| m["name"] == "snapshots").unwrap();
    assert!(snap["readOnly"] != true, "snapshots are written");
    let s = pod_settings(&k);
    let mount = snap["mountPath"].as_str().unwrap();
    assert!(
        s.snapshot.path.starts_with(&format!("{}/", mount.trim_end_matches('/'))),
        "snapshot.path {} lies under the snapshots mount {mount}",
        s.snapshot.path
    );
}

#[test]
fn settings_and_environment_load_as_the_service_loads_them() {
    let k = K8s::load();
    let s = pod_settings(&k);
    assert_eq!(s.source.kind.as_str(), "kafka");
    assert_eq!(s.sink.kind.as_str(), "kafka");
    assert!(!s.admin.token.is_empty(), "the non-loopback admin endpoint gets its token from a Secret");
    assert_eq!(s.kafka.bootstrap_servers, k.env().iter().find(|(n, _)| n == "SIEVELINE__KAFKA__BOOTSTRAP_SERVERS").unwrap().1);
    // Security properties reach the Kafka clients under their librdkafka names.
    let props: Vec<String> = s.kafka.properties.keys().map(|p| sieveline::settings::kafka_property_name(p)).collect();
    for p in ["security.protocol", "sasl.mechanism", "sasl.username", "sasl.password", "ssl.ca.location", "client.id"] {
        assert!(props.iter().any(|x| x == p), "{p} passed through: {props:?}");
    }
    // The CA path the environment names is inside the mounted Secret.
    let ca = &s.kafka.properties.iter().find(|(p, _)| sieveline::settings::kafka_property_name(p) == "ssl.ca.location").unwrap().1;
    let mounts = k.container()["volumeMounts"].as_array().unwrap();
    assert!(mounts.iter().any(|m| m["name"] == "kafka-ca" && ca.starts_with(m["mountPath"].as_str().unwrap())), "{ca}");
    // The model path is on the read-only models volume.
    let models = mounts.iter().find(|m| m["name"] == "models").expect("models mount");
    assert!(s.service.model.starts_with(models["mountPath"].as_str().unwrap()), "{}", s.service.model);

    // Every SIEVELINE__ name written anywhere in the deploy assets and the runbook is a settings key.
    let mut texts = vec![repo().join("docs/operations.md"), repo().join("deploy/systemd/sieveline.service"), repo().join("deploy/docker/Dockerfile")];
    for e in std::fs::read_dir(repo().join("deploy/k8s")).unwrap() {
        texts.push(e.unwrap().path());
    }
    let re = regex::Regex::new(r"SIEVELINE__[A-Z0-9_]*[A-Z0-9]").unwrap();
    let mut seen = 0;
    for f in &texts {
        let text = std::fs::read_to_string(f).unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        for m in re.find_iter(&text) {
            // Placeholders in prose (SIEVELINE__SECTION__KEY) are not names.
            if m.as_str() == "SIEVELINE__SECTION__KEY" {
                continue;
            }
            assert!(settings_key_exists(m.as_str()), "{} names {}, which is not a settings key", f.display(), m.as_str());
            seen += 1;
        }
    }
    assert!(seen >= 8, "the names were found ({seen})");
    assert!(!settings_key_exists("SIEVELINE__KAFKA__BOOTSTRAP_SERVER"), "a misspelt name is caught");
    assert!(!settings_key_exists("SIEVELINE__ADMIN__TOKEN__X"), "a level too deep is caught");
}

#[test]
fn ports_probes_and_scrape_target_match_the_admin_endpoint() {
    let k = K8s::load();
    let s = pod_settings(&k);
    let port = port_of(&s.admin.bind);
    assert!(s.admin.enabled);
    let c = k.container();
    let ports = c["ports"].as_array().unwrap();
    let admin = ports.iter().find(|p| p["name"] == "admin").expect("a port named admin");
    assert_eq!(admin["containerPort"], port, "container port = admin.bind port");
    assert_eq!(runtime_instruction("EXPOSE"), port.to_string(), "Dockerfile EXPOSE");
    for (probe, path) in [("readinessProbe", PATH_READYZ), ("livenessProbe", PATH_HEALTHZ), ("startupProbe", PATH_HEALTHZ)] {
        let g = &c[probe]["httpGet"];
        assert_eq!(g["path"], path, "{probe}");
        assert!(g["port"] == "admin" || g["port"] == port, "{probe} port {}", g["port"]);
    }
    let ann = &k.deployment()["spec"]["template"]["metadata"]["annotations"];
    let svc = k.get("Service", "sieveline-admin");
    for a in [ann, &svc["metadata"]["annotations"]] {
        assert_eq!(a["prometheus.io/scrape"], "true");
        assert_eq!(a["prometheus.io/port"], port.to_string());
        assert_eq!(a["prometheus.io/path"], PATH_METRICS);
    }
    let sp = &svc["spec"]["ports"][0];
    assert_eq!(sp["port"], port);
    assert!(sp["targetPort"] == "admin" || sp["targetPort"] == port);
    assert_eq!(svc["spec"]["selector"], k.deployment()["spec"]["selector"]["matchLabels"]);
}

#[test]
fn shutdown_user_and_entry_agree_between_image_pod_and_unit() {
    let k = K8s::load();
    let s = pod_settings(&k);
    let pod = &k.deployment()["spec"]["template"]["spec"];
    // Grace: the drain limit, then flush, commit, leaving the group; 10 s of margin at least.
    let grace_ms = pod["terminationGracePeriodSeconds"].as_u64().unwrap() * 1000;
    assert!(grace_ms >= s.service.drain_timeout_ms + 10_000, "grace {grace_ms} ms vs drain {} ms", s.service.drain_timeout_ms);
    let stop_ms = seconds(&unit_value("TimeoutStopSec")) * 1000;
    let default_drain = Settings::defaults().service.drain_timeout_ms;
    assert!(stop_ms >= default_drain.max(s.service.drain_timeout_ms) + 10_000, "TimeoutStopSec {stop_ms} ms");

    // The same non-root user in the image and the pod.
    let user = runtime_instruction("USER");
    let (uid, gid) = user.split_once(':').expect("USER uid:gid");
    assert_ne!(uid, "0");
    let sc = &pod["securityContext"];
    assert_eq!(sc["runAsNonRoot"], true);
    assert_eq!(sc["runAsUser"].to_string(), uid);
    assert_eq!(sc["runAsGroup"].to_string(), gid);
    assert_eq!(k.container()["securityContext"]["allowPrivilegeEscalation"], false);

    // One entry command: the image's ENTRYPOINT + CMD, the pod's args, the unit's ExecStart.
    let entry = exec_form("ENTRYPOINT");
    let cmd = exec_form("CMD");
    let args: Vec<String> = serde_json::from_value(k.container()["args"].clone()).unwrap();
    assert_eq!(args, cmd, "pod args = image CMD");
    assert!(k.container().get("command").is_none(), "the pod keeps the image's ENTRYPOINT");
    let exec: Vec<String> = unit_value("ExecStart").split_whitespace().map(String::from).collect();
    assert_eq!(exec, [entry.clone(), cmd.clone()].concat(), "unit ExecStart = image entry");
    // The settings path in the command is the ConfigMap's key in its mount.
    let config = &cmd[cmd.iter().position(|a| a == "--config").expect("--config") + 1];
    let (_, key) = k.settings_file();
    let mount = k.container()["volumeMounts"].as_array().unwrap().iter().find(|m| m["name"] == "settings").unwrap();
    assert_eq!(*config, format!("{}/{key}", mount["mountPath"].as_str().unwrap()));
    assert_eq!(cmd.last().map(String::as_str), Some("run"));
}

#[test]
fn replicas_share_one_group_and_disruptions_leave_coverage() {
    let k = K8s::load();
    let d = &k.deployment()["spec"];
    let replicas = d["replicas"].as_u64().unwrap();
    assert!(replicas >= 2, "more than one replica");
    // The group id is one value for every pod: from the settings file, never per pod.
    assert!(
        k.env().iter().all(|(n, v)| n != "SIEVELINE__KAFKA__GROUP_ID" || !v.starts_with("field:")),
        "no per-pod consumer group"
    );
    assert!(!pod_settings(&k).kafka.group_id.is_empty());
    let pdb = k.get("PodDisruptionBudget", "sieveline");
    assert_eq!(pdb["spec"]["selector"]["matchLabels"], d["selector"]["matchLabels"]);
    assert_eq!(pdb["spec"]["maxUnavailable"], 1);
    let labels = &d["template"]["metadata"]["labels"];
    for (k2, v) in d["selector"]["matchLabels"].as_object().unwrap() {
        assert_eq!(&labels[k2], v, "pods carry the selector's labels");
    }
    let ru = &d["strategy"]["rollingUpdate"];
    assert_eq!(ru["maxUnavailable"], 0, "a rollout never runs below the replica count");
}

#[test]
fn systemd_unit_is_accepted_by_systemd_analyze() {
    assert_eq!(unit_value("ExecReload"), "/bin/kill -HUP $MAINPID", "SIGHUP is the hot-reload signal");
    assert_eq!(unit_value("Restart"), "on-failure");
    assert_eq!(unit_value("RestartPreventExitStatus"), "2 4", "bad settings and refused models are not restarted");
    assert_eq!(unit_value("KillSignal"), "SIGTERM", "SIGTERM starts the drain");
    for (key, want) in [("NoNewPrivileges", "yes"), ("ProtectSystem", "strict"), ("ProtectHome", "yes"), ("PrivateTmp", "yes"), ("DynamicUser", "yes")] {
        assert_eq!(unit_value(key), want, "{key}");
    }
    for (s, key, value) in unit() {
        if s == "Service" && key == "Environment" {
            let name = value.split('=').next().unwrap();
            assert!(name == "SIEVELINE_LOG" || settings_key_exists(name), "Environment {name}");
        }
    }
    // systemd's own checker, on a copy whose ExecStart names the binary built here (verify
    // checks that the executable exists).
    let dir = std::env::temp_dir().join(format!("sieveline-unit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let text = std::fs::read_to_string(repo().join("deploy/systemd/sieveline.service")).unwrap();
    let copy = dir.join("sieveline.service");
    std::fs::write(&copy, text.replace("/usr/local/bin/sieveline", env!("CARGO_BIN_EXE_sieveline"))).unwrap();
    let out = std::process::Command::new("systemd-analyze")
        .arg("verify")
        .arg(&copy)
        .output()
        .expect("systemd-analyze (package systemd, installed by scripts/install-deps.sh)");
    let err = String::from_utf8_lossy(&out.stderr);
    let own: Vec<&str> = err.lines().filter(|l| l.contains("sieveline.service")).collect();
    assert!(out.status.success() && own.is_empty(), "systemd-analyze verify: {err}");
    let _ = std::fs::remove_dir_all(&dir);
}
