#!/usr/bin/env bash
# A real zenoh router between a publisher and the watcher, both in client mode, on
# loopback: shows data flows through zenohd. Skips when zenohd is not installed.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v zenohd >/dev/null; then
  echo "router-check: zenohd not installed: skipped (cargo install zenohd)"
  exit 0
fi
bin=${PLUMBLINE_BIN:-target/debug/plumbline}
dir=$(mktemp -d)
port() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }
rport=$(port)
hport=$(port)
zenohd --listen "tcp/127.0.0.1:$rport" --no-multicast-scouting >"$dir/router.log" 2>&1 &
rpid=$!
sleep 1.5
"$bin" --set "http.listen=127.0.0.1:$hport" watch --mode client --connect "tcp/127.0.0.1:$rport" --no-multicast --report "$dir/r.json" >"$dir/watch.log" 2>&1 &
wpid=$!
for _ in $(seq 1 100); do
  curl -sf "127.0.0.1:$hport/readyz" >/dev/null 2>&1 && break
  sleep 0.1
done
sleep 0.5
"$bin" publish replay-logs/campus-loop.jsonl --rate 20 --mode client --connect "tcp/127.0.0.1:$rport" --no-multicast
sleep 1
kill -TERM "$wpid"
wait "$wpid" || true
kill "$rpid" || true
wait "$rpid" 2>/dev/null || true
python3 - "$dir/r.json" <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))
steps = r["steps"]["tracking"]["evaluated"]
assert steps == 600, f"{steps} tracking steps through the router"
print(f"router-check: {steps} tracking steps through zenohd: ok")
PY
rm -rf "$dir"
