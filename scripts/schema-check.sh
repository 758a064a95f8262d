#!/usr/bin/env bash
# Holds `plumbline schema record` to an outside validator, Python's `jsonschema` package
# (Draft202012Validator): every record of the shipped JSON Lines log validates, and records
# that plumbline rejects for shape, type or plausibility do not (and plumbline rejects
# each of them too). Skips when the package is missing.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! python3 -c "import jsonschema" 2>/dev/null; then
  echo "schema-check: jsonschema not installed: skipped"
  exit 0
fi
bin=${BIN:-target/debug/plumbline}
dir=$(mktemp -d)
"$bin" schema record >"$dir/record.schema.json"
cat >"$dir/bad.jsonl" <<'BAD'
{"key":"rig/estimate/ego","recv":1.0,"msg":[0.9,1.0,2.0,0.1]}
{"key":"rig/estimate/ego","recv":1.0,"msg":{"stamp":1.0,"x":1.0,"y":2.0}}
{"key":"rig/estimate/objects","recv":1.0,"msg":{"stamp":1.0,"objects":[{"id":1,"x":"a","y":2.0}]}}
{"key":"rig/estimate/objects","recv":1.0,"msg":{"stamp":1.0,"objects":[[1,2.0,3.0]]}}
{"key":"rig/reference/objects","recv":1.0,"msg":{"stamp":1.0,"objects":[{"id":1,"x":1e308,"y":2.0}]}}
{"key":"rig/reference/objects","recv":1.0,"msg":{"stamp":1.0,"frame":"map","objects":[]}}
{"key":"rig/reference/objects","recv":1.0,"msg":{"stamp":1.0,"objects":[{"id":-1,"x":1.0,"y":2.0}]}}
{"key":"rig/reference/obstacles","recv":0.0,"msg":{"stamp":0.0,"obstacles":[{"id":1,"shape":"polygon","points":[[0,0],[1,1]]}]}}
{"key":"rig/reference/obstacles","recv":0.0,"msg":{"stamp":0.0,"obstacles":[{"id":1,"shape":"box","x":0,"y":0,"length":0,"width":1}]}}
{"key":"rig/reference/obstacles","recv":0.0,"msg":{"stamp":0.0,"obstacles":[{"id":1,"shape":"circle","x":0,"y":0}]}}
{"key":"rig/plan/path","recv":1.0,"msg":{"stamp":1.0,"poses":[{"x":0.0}]}}
{"key":"rig/unbound","recv":1.0,"msg":{"stamp":1.0,"x":1.0,"y":2.0,"yaw":0.0}}
{"key":"rig/estimate/ego","recv":2e10,"msg":{"stamp":1.0,"x":1.0,"y":2.0,"yaw":0.0}}
["rig/estimate/ego",1.0,{"stamp":1.0,"x":1.0,"y":2.0,"yaw":0.0}]
BAD
"$bin" replay "$dir/bad.jsonl" --quiet --report "$dir/bad.json" >/dev/null 2>&1 || true
python3 - "$dir/record.schema.json" replay-logs/campus-loop.jsonl "$dir/bad.jsonl" "$dir/bad.json" <<'PY'
import json, sys
from jsonschema import Draft202012Validator
schema = json.load(open(sys.argv[1]))
Draft202012Validator.check_schema(schema)
v = Draft202012Validator(schema)
good = [json.loads(l) for l in open(sys.argv[2]) if l.strip()]
errs = [(i + 1, e.message) for i, r in enumerate(good) for e in list(v.iter_errors(r))[:1]]
assert not errs, f"shipped records the schema rejects: {errs[:3]}"
bad = [json.loads(l) for l in open(sys.argv[3]) if l.strip()]
passed = [i + 1 for i, r in enumerate(bad) if v.is_valid(r)]
assert not passed, f"bad records the schema accepts: lines {passed}"
rep = json.load(open(sys.argv[4]))
assert rep["records"]["rejected"] == len(bad), f"plumbline rejected {rep['records']['rejected']} of {len(bad)}"
print(f"schema-check: {len(good)} shipped records valid, {len(bad)} rejected records invalid: ok")
PY
rm -rf "$dir"
