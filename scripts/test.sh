#!/usr/bin/env bash
# The whole test suite: installs what it needs, starts a real Kafka broker on loopback (unless
# SIEVELINE_TEST_BROKERS names one), runs every Rust test in release mode, and stops the broker.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
cd "$root"
out="$root/test-output"
mkdir -p "$out"

bash scripts/install-deps.sh
export SIEVELINE_PYTHON="$(bash scripts/ref-venv.sh | tail -1)"
export SIEVELINE_DATA_DIR="${SIEVELINE_DATA_DIR:-$root/../shared/data}"
export SIEVELINE_TEST_OUTPUT="$out"

started_broker=0
broker_dir="$out/broker"
cleanup() {
  rc=$?
  if [ "$started_broker" = 1 ]; then
    bash scripts/test-broker/broker.sh stop "$broker_dir" || true
    if [ "$rc" != 0 ]; then
      echo "test.sh: tests failed; broker log kept at $broker_dir/broker.log" >&2
    fi
  fi
  exit $rc
}
trap cleanup EXIT
if [ -z "${SIEVELINE_TEST_BROKERS:-}" ]; then
  bash scripts/test-broker/broker.sh install
  rm -rf "$broker_dir"
  mkdir -p "$broker_dir"
  started_broker=1
  SIEVELINE_TEST_BROKERS="$(bash scripts/test-broker/broker.sh start "$broker_dir" | tail -1)"
  export SIEVELINE_TEST_BROKERS
  echo "test.sh: test broker at $SIEVELINE_TEST_BROKERS" >&2
fi

cargo build --release --locked --bins
cargo test --release --locked --lib --bins --tests -- --test-threads="${SIEVELINE_TEST_THREADS:-2}"
# Benchmarks run once each as a smoke test (criterion's test mode); figures come from `cargo bench`.
cargo test --release --locked --benches
