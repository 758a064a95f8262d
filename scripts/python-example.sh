#!/usr/bin/env bash
# Runs examples/python_publisher.py (zenoh's Python binding, JSON payloads) against a real
# watcher on loopback and checks the watcher's report. Skips when the binding is missing.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! python3 -c "import zenoh" 2>/dev/null; then
  echo "python-example: eclipse-zenoh not installed: skipped"
  exit 0
fi
. scripts/lib.sh
dir=$(mktemp -d)
zport=$(port)
hport=$(port)
"$bin" --set "http.listen=127.0.0.1:$hport" watch --listen "tcp/127.0.0.1:$zport" --no-multicast --report "$dir/r.json" >"$dir/watch.log" 2>&1 &
pid=$!
wait_ready "$hport" "$dir/watch.log"
python3 examples/python_publisher.py --connect "tcp/127.0.0.1:$zport" --seconds 3
sleep 1
kill -TERM "$pid"
wait "$pid" || true
python3 - "$dir/r.json" <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))
steps = r["steps"]["tracking"]["evaluated"]
ego = r["metrics"]["ego_position_error_m"]["mean"]
assert steps >= 10, f"only {steps} tracking steps"
# The example's estimated pose is off by (0.1, -0.05): |e| = 0.1118 m.
assert abs(ego - (0.1**2 + 0.05**2) ** 0.5) < 1e-6, ego
g = r["metrics"]["gospa"]["mean"]
# Two carts tracked 0.2 m off each: gospa (p = 1) = 0.4 m.
assert abs(g - 0.4) < 1e-6, g
print(f"python-example: {steps} tracking steps, gospa {g:.4f} m, ego error {ego:.4f} m: ok")
PY
rm -rf "$dir"
