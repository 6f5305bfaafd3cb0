//! Shared by the deploy tests: the manifests read as YAML (PyYAML from the reference venv), the Dockerfile's runtime instructions, the Deployment's environment, and settings keys resolved against the embedded defaults.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde_json::Value;

pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The reference venv's python (`SIEVELINE_PYTHON`, set by scripts/test.sh); missing is a failure.
pub fn python() -> String {
    std::env::var("SIEVELINE_PYTHON").unwrap_or_else(|_| {
        panic!("SIEVELINE_PYTHON is not set: run scripts/test.sh (it builds the reference venv with the pinned PyYAML)")
    })
}

/// Every document of a YAML file, parsed by PyYAML's `safe_load_all` (the version pinned in
/// tests/reference/requirements.txt) and handed over as JSON.
pub fn yaml_docs(path: &Path) -> Vec<Value> {
    let script = "import sys, json, yaml\nprint(json.dumps([d for d in yaml.safe_load_all(open(sys.argv[1], encoding='utf-8')) if d is not None]))";
    let out = std::process::Command::new(python()).args(["-c", script]).arg(path).output().expect("run python");
    assert!(out.status.success(), "{} is not valid YAML: {}", path.display(), String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("JSON from the YAML reader")
}

/// The Kubernetes objects of deploy/k8s (kustomization resources), keyed by (kind, name).
pub struct K8s {
    pub objects: BTreeMap<(String, String), Value>,
    pub kustomization: Value,
}

impl K8s {
    pub fn load() -> K8s {
        let dir = repo().join("deploy/k8s");
        let kustomization = yaml_docs(&dir.join("kustomization.yaml")).remove(0);
        let mut objects = BTreeMap::new();
        let mut files: Vec<String> =
            kustomization["resources"].as_array().expect("kustomization resources").iter().map(|v| v.as_str().unwrap().to_string()).collect();
        // Secrets are examples, created out of band, but the Deployment refers to them.
        files.push("secret.example.yaml".into());
        for f in files {
            for d in yaml_docs(&dir.join(&f)) {
                let kind = d["kind"].as_str().unwrap_or_else(|| panic!("{f}: an object without kind")).to_string();
                let name = d["metadata"]["name"].as_str().unwrap_or_else(|| panic!("{f}: {kind} without a name")).to_string();
                assert!(objects.insert((kind.clone(), name.clone()), d).is_none(), "{kind}/{name} defined twice");
            }
        }
        K8s { objects, kustomization }
    }

    pub fn get(&self, kind: &str, name: &str) -> &Value {
        self.objects.get(&(kind.to_string(), name.to_string())).unwrap_or_else(|| panic!("no {kind}/{name} in deploy/k8s"))
    }

    pub fn deployment(&self) -> &Value {
        self.get("Deployment", "sieveline")
    }

    pub fn container(&self) -> &Value {
        let cs = self.deployment()["spec"]["template"]["spec"]["containers"].as_array().expect("containers");
        assert_eq!(cs.len(), 1, "one container");
        &cs[0]
    }

    /// The settings file the ConfigMap generator turns into `sieveline-settings`, and its key in the ConfigMap.
    pub fn settings_file(&self) -> (PathBuf, String) {
        let gens = self.kustomization["configMapGenerator"].as_array().expect("configMapGenerator");
        let g = gens.iter().find(|g| g["name"] == "sieveline-settings").expect("a sieveline-settings ConfigMap generator");
        let file = g["files"][0].as_str().expect("a settings file").to_string();
        let (key, path) = match file.split_once('=') {
            Some((k, p)) => (k.to_string(), p.to_string()),
            None => (Path::new(&file).file_name().unwrap().to_string_lossy().into_owned(), file.clone()),
        };
        (repo().join("deploy/k8s").join(path), key)
    }

    /// The container's environment: literal values as written; values from Secrets and the
    /// downward API as placeholders (`secret:NAME/KEY`, `field:PATH`).
    pub fn env(&self) -> Vec<(String, String)> {
        self.container()["env"]
            .as_array()
            .expect("env")
            .iter()
            .map(|e| {
                let name = e["name"].as_str().unwrap().to_string();
                let value = if let Some(v) = e["value"].as_str() {
                    v.to_string()
                } else if let Some(r) = e["valueFrom"]["secretKeyRef"].as_object() {
                    format!("secret:{}/{}", r["name"].as_str().unwrap(), r["key"].as_str().unwrap())
                } else if let Some(f) = e["valueFrom"]["fieldRef"]["fieldPath"].as_str() {
                    format!("field:{f}")
                } else {
                    panic!("env {name}: neither a value nor a secret or field reference");
                };
                (name, value)
            })
            .collect()
    }
}

/// The Dockerfile's instructions as (keyword, argument), continuations joined, comments dropped.
pub fn dockerfile() -> Vec<(String, String)> {
    let text = std::fs::read_to_string(repo().join("deploy/docker/Dockerfile")).unwrap();
    let mut out = Vec::new();
    let mut buf = String::new();
    for line in text.lines() {
        let t = line.trim();
        if t.starts_with('#') || (buf.is_empty() && t.is_empty()) {
            continue;
        }
        if let Some(head) = line.strip_suffix('\\') {
            buf.push_str(head);
            buf.push(' ');
            continue;
        }
        buf.push_str(line);
        let (kw, rest) = buf.trim().split_once(' ').unwrap_or((buf.trim(), ""));
        out.push((kw.to_uppercase(), rest.trim().to_string()));
        buf.clear();
    }
    out
}

/// The runtime stage's last value of an instruction (after the last FROM).
pub fn runtime_instruction(kw: &str) -> String {
    let d = dockerfile();
    let from = d.iter().rposition(|(k, _)| k == "FROM").expect("FROM");
    d[from..].iter().rev().find(|(k, _)| k == kw).map(|(_, v)| v.clone()).unwrap_or_else(|| panic!("no {kw} in the runtime stage"))
}

/// An exec-form instruction as its argument vector.
pub fn exec_form(kw: &str) -> Vec<String> {
    serde_json::from_str(&runtime_instruction(kw)).unwrap_or_else(|e| panic!("{kw} is not an exec-form JSON array: {e}"))
}

/// Does `SIEVELINE__A__B…` name a settings key? Resolved against the embedded defaults
/// (config/default.toml): each level must exist, and a table that is empty there
/// (`kafka.properties`, `review.class_min_confidence`, …) takes keys of any name.
pub fn settings_key_exists(env_name: &str) -> bool {
    let Some(path) = env_name.strip_prefix("SIEVELINE__") else { return false };
    let defaults: toml::Value = toml::from_str(sieveline::settings::DEFAULT_TOML).unwrap();
    let mut at = &defaults;
    for part in path.split("__") {
        let key = part.to_lowercase();
        match at {
            toml::Value::Table(t) if t.is_empty() => return true,
            toml::Value::Table(t) => match t.get(&key) {
                Some(v) => at = v,
                None => return false,
            },
            _ => return false,
        }
    }
    true
}

/// The port of an `ip:port` bind address.
pub fn port_of(bind: &str) -> u16 {
    bind.parse::<std::net::SocketAddr>().unwrap_or_else(|_| panic!("{bind:?} is not ip:port")).port()
}
