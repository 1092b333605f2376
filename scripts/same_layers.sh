#!/usr/bin/env bash
# Byte-for-byte comparison of two trackswing binaries' layers, for refactors that must not change
# behaviour. Runs the same cases with both and compares every file they write; manifest.json is
# compared with the keys that hold the time of the run, the run's wall times and the binary's
# version left out.
#
#   scripts/same_layers.sh OLD_BIN NEW_BIN [WORK_DIR] [--b1]
#
# Cases: the shipped demo, the Lambert GRIB2 case of scripts/lambert_case.sh (needs gdalwarp),
# and with --b1 the 400×300×48-step, 123-scenario case of scripts/bench.sh (slow: minutes).
set -euo pipefail
old=$(realpath "$1")
new=$(realpath "$2")
work=${3:-$(mktemp -d)}
b1=${4:-}
here=$(cd "$(dirname "$0")/.." && pwd)
mkdir -p "$work"
status=0

compare() {
  local name=$1 a=$2 b=$3
  python3 - "$a" "$b" "$name" <<'PY' || status=1
import hashlib, json, os, sys
a, b, name = sys.argv[1:]
def files(root):
    out = {}
    for d, _, fs in os.walk(root):
        for f in fs:
            p = os.path.join(d, f)
            out[os.path.relpath(p, root)] = p
    return out
fa, fb = files(a), files(b)
bad = sorted(set(fa) ^ set(fb))
volatile = {"written_utc", "trackswing_version"}
def strip(v):
    if isinstance(v, dict):
        return {k: strip(x) for k, x in v.items() if k not in volatile}
    if isinstance(v, list):
        return [strip(x) for x in v]
    return v
for rel in sorted(set(fa) & set(fb)):
    if rel.endswith("manifest.json"):
        same = strip(json.load(open(fa[rel]))) == strip(json.load(open(fb[rel])))
    elif rel.endswith(".html") or rel.endswith(".txt"):
        # the report and the logs carry the run's time; compare them without lines naming it
        def body(p):
            return [l for l in open(p, encoding="utf-8") if "written" not in l and " s)" not in l]
        same = body(fa[rel]) == body(fb[rel])
    else:
        same = hashlib.sha256(open(fa[rel], "rb").read()).digest() == \
            hashlib.sha256(open(fb[rel], "rb").read()).digest()
    if not same:
        bad.append(rel)
print(f"{name}: {len(fa)} files, {'all the same' if not bad else 'DIFFER: ' + ', '.join(bad)}")
sys.exit(1 if bad else 0)
PY
}

run_both() {
  local name=$1
  shift
  "$old" "$@" --out "$work/$name-old" --quiet
  "$new" "$@" --out "$work/$name-new" --quiet
  compare "$name" "$work/$name-old" "$work/$name-new"
}

rm -rf "$work"/*-old "$work"/*-new
run_both demo demo
rm -rf "$work/lcc-case"
"$here/scripts/lambert_case.sh" "$new" "$work/lcc-case" > /dev/null
run_both lambert run "$work/lcc-case/case.toml" --cross=-60:60:30 --along=0
if [ "$b1" = "--b1" ]; then
  if [ ! -f "$work/b1/case.toml" ]; then
    "$new" make-demo --out "$work/b1" --nx 400 --ny 300 --steps 48 --step-hours 1 --levels 6 > /dev/null
  fi
  run_both b1 run "$work/b1/case.toml" --cross=-100:100:5 --along=-60:60:60
fi
exit $status
