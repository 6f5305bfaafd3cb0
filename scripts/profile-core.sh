#!/usr/bin/env bash
# Instruction counts per record (valgrind callgrind, independent of machine load) for the
# analyzer, scoring and learning on synthetic ~120-byte log lines. Prints one line per stage.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --example score_loop >/dev/null 2>&1
n=50000
count() { valgrind --tool=callgrind --callgrind-out-file=/dev/null target/release/examples/score_loop "$n" "$1" 2>&1 | sed -n 's/.*Collected : //p'; }
gen=$(count gen)
for mode in analyze score learn; do
  total=$(count "$mode")
  echo "$mode: $(( (total - gen) / n )) instructions per record"
done
