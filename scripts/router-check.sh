#!/usr/bin/env bash
# A real zenoh router between a publisher and the watcher, both in client mode, on
# loopback: shows data flows through zenohd. Skips when zenohd is not installed.
set -euo pipefail
cd "$(dirname "$0")/.."
. scripts/lib.sh
need_zenohd router-check
dir=$(mktemp -d)
rport=$(port)
hport=$(port)
zenohd --listen "tcp/127.0.0.1:$rport" --no-multicast-scouting >"$dir/router.log" 2>&1 &
rpid=$!
sleep 1.5
"$bin" --set "http.listen=127.0.0.1:$hport" watch --mode client --connect "tcp/127.0.0.1:$rport" --no-multicast --report "$dir/r.json" >"$dir/watch.log" 2>&1 &
wpid=$!
wait_ready "$hport" "$dir/watch.log"
sleep 0.5
"$bin" publish replay-logs/campus-loop.jsonl --speed 20 --mode client --connect "tcp/127.0.0.1:$rport" --no-multicast
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
