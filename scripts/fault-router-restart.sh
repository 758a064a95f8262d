#!/usr/bin/env bash
# Fault: the zenoh router restarts under a running watcher. A publisher (the load
# generator, 200 msg/s for 16 s) and the watcher are both zenoh clients of one zenohd on
# loopback. The router is killed 5 s in and started again on the same port 3 s later; the
# watcher must take messages again without a restart of its own. Prints the message counts
# before, during and after the outage. Skips when zenohd is not installed.
set -euo pipefail
cd "$(dirname "$0")/.."
. scripts/lib.sh
need_zenohd fault-router-restart
dir=$(mktemp -d)
rport=$(port)
hport=$(port)
router() { zenohd --listen "tcp/127.0.0.1:$rport" --no-multicast-scouting >>"$dir/router.log" 2>&1 & echo $!; }
count() { curl -sf "127.0.0.1:$hport/metrics" | awk '/^plumbline_messages_total/ {s += $2} END {print s + 0}'; }
cleanup() { kill "$wpid" "$lpid" "$rpid" 2>/dev/null || true; rm -rf "$dir"; }
rpid=$(router)
sleep 1.5
"$bin" --set "http.listen=127.0.0.1:$hport" watch --mode client --connect "tcp/127.0.0.1:$rport" \
  --no-multicast >"$dir/watch.log" 2>&1 &
wpid=$!
trap cleanup EXIT
wait_ready "$hport" "$dir/watch.log"
"$bin" stress --messages-per-s 200 --seconds 16 --objects 5 --mode client --connect "tcp/127.0.0.1:$rport" \
  --no-multicast >"$dir/load.log" 2>&1 &
lpid=$!
sleep 5
before=$(count)
kill "$rpid"; wait "$rpid" 2>/dev/null || true
t_kill=$(date +%s.%N)
sleep 0.5
down_start=$(count)
sleep 2.5
down_end=$(count)
rpid=$(router)
t_up=$(date +%s.%N)
# The first message after the restart: poll every 100 ms for up to 10 s.
resumed=""
for _ in $(seq 1 100); do
  sleep 0.1
  if [ "$(count)" -gt "$down_end" ]; then resumed=$(date +%s.%N); break; fi
done
sleep 2
after=$(count)
kill -0 "$wpid"   # the watcher never stopped
echo "fault-router-restart: messages before the kill $before, during the outage $down_start -> $down_end, 2 s after resuming $after"
[ -n "$resumed" ] || { echo "fault-router-restart: no message after the router came back"; cat "$dir/watch.log" | tail -5; exit 1; }
python3 - "$before" "$down_start" "$down_end" "$after" "$t_up" "$resumed" <<'PY'
import sys
before, d0, d1, after = map(int, sys.argv[1:5])
t_up, resumed = map(float, sys.argv[5:7])
assert before > 500, f"only {before} messages before the kill"
assert d1 == d0, f"{d1 - d0} messages arrived with the router down"
assert after - d1 >= 300, f"only {after - d1} messages in the 2 s after resuming"
print(f"fault-router-restart: watcher took messages again {resumed - t_up:.2f} s after the router restarted: ok")
PY
