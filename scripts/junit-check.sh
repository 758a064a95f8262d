#!/usr/bin/env bash
# Validates the gate's JUnit XML against a published JUnit schema: junit-10.xsd, the
# Surefire/Jenkins schema that pytest's source distribution ships (fetched from PyPI, not
# committed), with xmllint (Debian's libxml2-utils). Skips when either is unavailable.
set -euo pipefail
cd "$(dirname "$0")/.."
command -v xmllint >/dev/null || { echo "junit-check: xmllint not installed: skipped"; exit 0; }
bin=${PLUMBLINE_BIN:-target/debug/plumbline}
dir=$(mktemp -d)
if ! python3 -m pip download -q --no-binary :all: --no-deps pytest==8.3.4 -d "$dir" >/dev/null 2>&1; then
  echo "junit-check: pytest sdist not downloadable: skipped"
  exit 0
fi
tar -xzf "$dir"/pytest-8.3.4.tar.gz -C "$dir" pytest-8.3.4/testing/example_scripts/junit-10.xsd
xsd="$dir/pytest-8.3.4/testing/example_scripts/junit-10.xsd"
"$bin" replay replay-logs/campus-loop.jsonl --quiet --report "$dir/base.json"
"$bin" scenario --out "$dir/worse.jsonl" --seed 1 --noise 0.3 2>/dev/null
"$bin" --config config/rig.toml gate --baseline "$dir/base.json" "$dir/worse.jsonl" --junit "$dir/gate.xml" >/dev/null || true
"$bin" gate --baseline "$dir/base.json" replay-logs/campus-loop.jsonl --junit "$dir/pass.xml" >/dev/null
xmllint --noout --schema "$xsd" "$dir/gate.xml" "$dir/pass.xml"
grep -q 'type="regression"' "$dir/gate.xml"
echo "junit-check: gate JUnit XML validates against junit-10.xsd: ok"
rm -rf "$dir"
