# Shared by the scripts that start a watcher on loopback. Source it after `cd` to the
# repository root.

# A free TCP port on 127.0.0.1.
port() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }

# Exits 0 with a "skipped" line when zenohd is not installed. $1: the script's name.
need_zenohd() {
  if ! command -v zenohd >/dev/null; then
    echo "$1: zenohd not installed: skipped (cargo install zenohd)"
    exit 0
  fi
}

# Waits up to 10 s for /readyz on port $1; on failure prints the log $2's tail and exits 1.
wait_ready() {
  for _ in $(seq 1 100); do
    curl -sf "127.0.0.1:$1/readyz" >/dev/null 2>&1 && return 0
    sleep 0.1
  done
  echo "the watcher did not become ready:"
  tail -5 "$2"
  exit 1
}

bin=${PLUMBLINE_BIN:-target/debug/plumbline}
