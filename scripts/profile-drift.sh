#!/usr/bin/env bash
# Drift bookkeeping cost in instructions per record (valgrind callgrind: independent of machine
# load): the record loop's routing with the drift observer off and on, on the demo streams.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --example drift_loop >/dev/null 2>&1
passes=${PASSES:-10}
count() { valgrind --tool=callgrind --callgrind-out-file=/dev/null target/release/examples/drift_loop "$1" "$passes" "$2" 2>&1 | sed -n 's/.*Collected : //p'; }
for stream in tickets logs; do
  setup=$(count setup "$stream")
  off=$(count off "$stream")
  on=$(count on "$stream")
  records=$(( passes * $(wc -l < "demo-stream/$stream.jsonl") ))
  per_off=$(( (off - setup) / records ))
  per_on=$(( (on - setup) / records ))
  echo "$stream: off $per_off, on $per_on instructions per record; on/off $(python3 -c "print(f'{$per_on/$per_off:.4f}')")"
done
