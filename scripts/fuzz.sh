#!/usr/bin/env bash
# Runs the four fuzz targets (fuzz/fuzz_targets) for RUNS inputs each (default 1,000,000),
# seeded from the shipped campus log. Needs cargo-fuzz (`cargo install cargo-fuzz`); on a
# stable toolchain RUSTC_BOOTSTRAP=1 lets it pass its nightly flags. Sanitizers are off
# (`-s none`): the targets look for panics, and the crate has no unsafe code of its own.
# Prints one line per target: `fuzz: <target>: <runs> runs, <seconds> s: ok`.
set -euo pipefail
cd "$(dirname "$0")/.."
RUNS=${RUNS:-1000000}
export RUSTC_BOOTSTRAP=1
seeds=fuzz/corpus
mkdir -p "$seeds"/{decode_json,decode_postcard,read_jsonl,read_plb}
python3 - "$seeds" <<'PY'
import json, sys, os
seeds = sys.argv[1]
kinds = {"objects": 0, "ego": 1, "path": 2, "obstacles": 3}
lines = open("replay-logs/campus-loop.jsonl").read().splitlines()[:200]
for i, l in enumerate(lines[:60]):
    rec = json.loads(l)
    k = next(v for s, v in kinds.items() if rec["key"].endswith(s))
    open(os.path.join(seeds, "decode_json", f"line{i}"), "wb").write(bytes([k]) + json.dumps(rec["msg"]).encode())
for i in range(0, 200, 20):
    open(os.path.join(seeds, "read_jsonl", f"chunk{i}"), "w").write("\n".join(lines[i:i + 20]) + "\n")
PY
cargo fuzz build -s none -O >/dev/null 2>&1 || cargo fuzz build -s none -O
for t in decode_json decode_postcard read_jsonl read_plb; do
  start=$(date +%s)
  out=$(cargo fuzz run -s none -O "$t" "$seeds/$t" -- -runs="$RUNS" -max_len=65536 -rss_limit_mb=2048 2>&1 | tail -5)
  if echo "$out" | grep -q "Done $RUNS runs"; then
    echo "fuzz: $t: $RUNS runs, $(( $(date +%s) - start )) s: ok"
  else
    echo "$out"
    echo "fuzz: $t: FAILED"
    exit 1
  fi
done
