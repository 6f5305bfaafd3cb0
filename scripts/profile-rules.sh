#!/usr/bin/env bash
# Instruction counts per record (valgrind callgrind, independent of machine load) for the rules
# bench's workload: Banking77 test records, model only (also through the decider with no
# rules) against the 200 generated rules (model_first), and the matcher alone. Needs the
# data (SIEVELINE_DATA_DIR, default ../shared/data).
# With --annotate MODE, also prints the functions that cost most in that mode.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --example rules_loop >/dev/null 2>&1
rounds=3
count() { valgrind --tool=callgrind --callgrind-out-file="$2" target/release/examples/rules_loop "$rounds" "$1" 2>&1 | sed -n 's/.*Collected : //p'; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
base=$(count setup "$tmp/setup.out")
records=$((rounds * 3080))
for mode in model norules rules match; do
  total=$(count "$mode" "$tmp/$mode.out")
  echo "$mode: $(( (total - base) / records )) instructions per record"
done
if [ "${1:-}" = "--annotate" ]; then
  callgrind_annotate --inclusive=yes "$tmp/${2:-rules}.out" 2>/dev/null | sed -n '1,60p'
fi
