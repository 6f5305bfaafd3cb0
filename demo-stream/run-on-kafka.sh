#!/usr/bin/env bash
# The demo scenario on a real broker, in the shape of a deployment: starts the test
# broker (Apache Kafka from Maven Central, scripts/test-broker/broker.sh), creates the
# topics, checks the settings against the cluster with `sieveline check-config`, runs
# `sieveline run` on them, and produces the ticket stream and the reviewers' id-only
# labels (keyed by ticket id, so they are co-partitioned with the tickets). At the end
# it prints what the service learned and stops everything it started.
#
# Usage: demo-stream/run-on-kafka.sh [WORK_DIR]      (default target/kafka-demo)
# Environment: RECORDS (default 3000), RATE (records/s, default 300),
#              KEEP=1 to leave the service and broker running (the status page stays up;
#              WORK_DIR/left-running.json then names the service pid, admin port and broker),
#              SIEVELINE_BIN to use a built binary instead of building one.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
cd "$root"
work="$(mkdir -p "${1:-target/kafka-demo}" && cd "${1:-target/kafka-demo}" && pwd)"
records="${RECORDS:-3000}"
rate="${RATE:-300}"
broker="$root/scripts/test-broker/broker.sh"
say() { printf '\n== %s\n' "$*" >&2; }

if [ -n "${SIEVELINE_BIN:-}" ]; then
  bin="$SIEVELINE_BIN"
else
  say "building sieveline (release)"
  cargo build --release --bins -q
  bin="$root/target/release/sieveline"
fi

say "starting the test broker in $work/broker"
bash "$broker" install
rm -rf "$work/broker" && mkdir -p "$work/broker"
bootstrap="$(bash "$broker" start "$work/broker" | tail -1)"
svc_pid=""
cleanup() {
  if [ "${KEEP:-0}" = 1 ]; then
    echo "left running: service pid $svc_pid, broker at $bootstrap (stop: kill $svc_pid; $broker stop $work/broker)" >&2
    printf '{"service_pid":%s,"admin_port":%s,"bootstrap":"%s","broker_dir":"%s"}\n' \
      "${svc_pid:-0}" "${port:-0}" "$bootstrap" "$work/broker" > "$work/left-running.json"
    return
  fi
  [ -n "$svc_pid" ] && kill -TERM "$svc_pid" 2>/dev/null && wait "$svc_pid" 2>/dev/null || true
  bash "$broker" stop "$work/broker" >/dev/null 2>&1 || true
}
trap cleanup EXIT

classes="returns shipping billing account_access product_defect warranty order_changes product_questions"
say "creating topics on $bootstrap"
bash "$broker" create-topic "$work/broker" quill.tickets.in 4 >/dev/null
bash "$broker" create-topic "$work/broker" quill.tickets.labels.raw 4 >/dev/null   # co-partitioned with the input
bash "$broker" create-topic "$work/broker" quill.tickets.labels 3 >/dev/null       # the learned-label log
for t in quill.tickets.review quill.tickets.dead-letters; do bash "$broker" create-topic "$work/broker" "$t" 2 >/dev/null; done
for c in $classes; do bash "$broker" create-topic "$work/broker" "quill.tickets.routed.$c" 2 >/dev/null; done

say "generating $records tickets and their reviewers' labels"
"$bin" generate --kind tickets --records "$records" --out "$work/stream" >/dev/null
# Day one: a model folded from the first 100 reviewed tickets; the rest of the labels
# arrive while the service runs.
head -n 100 "$work/stream/tickets.labels.jsonl" > "$work/first-labels.jsonl"
tail -n +101 "$work/stream/tickets.raw-labels.jsonl" > "$work/later-raw-labels.jsonl"
"$bin" --config demo-stream/config-tickets.toml train --labels "$work/first-labels.jsonl" --out "$work/base.svm"

port="$(python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])')"
cat > "$work/settings.toml" <<EOF
[input]
id_field = "id"
[[input.fields]]
name = "subject"
weight = 2.0
[[input.fields]]
name = "body"
weight = 1.0

[rules]
path = "$root/demo-stream/rules-tickets.toml"
blend = "takeover"
takeover_labels = 50

[review]
min_confidence = 0.6

[service]
model = "$work/base.svm"

[source]
kind = "kafka"
topics = ["quill.tickets.in"]

[sink]
kind = "kafka"

[kafka]
bootstrap_servers = "$bootstrap"
group_id = "quill-tickets"

[routing]
topic_template = "quill.tickets.routed.{class}"
review_topic = "quill.tickets.review"

[dead_letter]
topic = "quill.tickets.dead-letters"

[learning]
enabled = true
label_topic = "quill.tickets.labels"
raw_label_topic = "quill.tickets.labels.raw"

[snapshot]
path = "$work/snapshot.svm"
interval_ms = 5000

[admin]
bind = "127.0.0.1:$port"
EOF

say "check-config against the cluster"
"$bin" --config "$work/settings.toml" check-config --connect

say "starting sieveline run (log: $work/service.log)"
SIEVELINE_LOG=info "$bin" --config "$work/settings.toml" run > "$work/service.log" 2>&1 &
svc_pid=$!
get() { python3 -c "import sys,urllib.request; print(urllib.request.urlopen('http://127.0.0.1:$port'+sys.argv[1], timeout=5).read().decode())" "$1"; }
for _ in $(seq 1 100); do get /readyz >/dev/null 2>&1 && break; sleep 0.3; done
get /readyz
echo "status page: http://127.0.0.1:$port/" >&2

say "producing the tickets ($rate/s) and the reviewers' id-only labels"
label_rate="$(python3 -c "print(round($rate * $(wc -l < "$work/later-raw-labels.jsonl") / $records, 1))")"
"$bin" --config "$work/settings.toml" feed --file "$work/stream/tickets.jsonl" --topic quill.tickets.in --key-field id --rate "$rate" &
feed_pid=$!
sleep 3
"$bin" --config "$work/settings.toml" feed --file "$work/later-raw-labels.jsonl" --topic quill.tickets.labels.raw --key-field id --rate "$label_rate"
wait "$feed_pid"
sleep 3

say "what the service did"
get /model | python3 -c 'import json,sys; m=json.load(sys.stdin); print("served model", m["model_version"], "-", m["labels_applied"], "labels learned on top of the base file")'
get /metrics | grep -E '^sieveline_(records_in_total|records_out_total|records_reviewed_total|labels_learned_total|labels_resolved_total|labels_rejected_total|records_dead_lettered_total\{reason="unknown id"\}|drift_class_mix_psi|feedback_accuracy_ratio) ' || true
echo "decisions are on quill.tickets.routed.<class>, uncertain ones on quill.tickets.review" >&2
