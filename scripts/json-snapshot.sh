#!/usr/bin/env bash
# JSON of every shipped lattice through every command, with limits that make the runs
# independent of the machine's speed, wall times masked. Run it before and after a change
# that must keep behaviour, and diff the two directories:
#
#   scripts/json-snapshot.sh /tmp/before      # on the old code
#   scripts/json-snapshot.sh /tmp/after       # on the new code
#   diff -r /tmp/before /tmp/after
#
# Needs a release build (cargo build --release) and python3 (to mask wall times).
set -euo pipefail
cd "$(dirname "$0")/.."
out=${1:?usage: scripts/json-snapshot.sh DIRECTORY}
mkdir -p "$out"
G=target/release/groundcount
mask() {
  python3 -c '
import json, re, sys
def t(x):
    return re.sub(r"\d+(\.\d+)?(e-?\d+)? s\b", "<t> s", x)
def m(v):
    if isinstance(v, dict):
        return {k: (None if any(w in k for w in ("seconds", "date", "elapsed", "time_s", "wall")) else m(x)) for k, x in v.items()}
    if isinstance(v, list):
        return [m(x) for x in v]
    if isinstance(v, str):
        return t(v)
    return v
text = sys.stdin.read()
try:
    print(json.dumps(m(json.loads(text)), indent=1, sort_keys=True))
except ValueError:
    print(t(text))
'
}
run() { # name, args...
  local name=$1; shift
  "$G" "$@" --format json > "$out/$name.raw" 2>/dev/null || echo "exit $?" > "$out/$name.exit"
  mask < "$out/$name.raw" > "$out/$name.json"
  rm "$out/$name.raw"
}
for f in lattices/*.yaml; do
  b=$(basename "$f" .yaml)
  dims=$(grep -m1 '^dimensions:' "$f" | awk '{print $2}')
  run "$b.inspect" inspect "$f"
  if [ "$dims" = 2 ]; then
    run "$b.exact-4x4" exact "$f" --cells 4x4 --threads 1
    run "$b.exact-3x3-open" exact "$f" --cells 3x3 --open a,b --threads 1
    run "$b.strip" strip "$f" --widths 2..8 --threads 1
    run "$b.sample" sample "$f" --cells 4x4 --replicas 4 --sweeps 40 --seed 3 --threads 1
  else
    run "$b.exact-2x1x1" exact "$f" --cells 2x1x1 --threads 1
    run "$b.sample" sample "$f" --cells 2x2x2 --replicas 4 --sweeps 40 --seed 3 --threads 1
  fi
  rm -rf "$out/report-$b"
  "$G" report "$f" -o "$out/report-$b" --budget 600 --max-exact-units 20 --widths 2..7 \
    --sample-cells "$([ "$dims" = 2 ] && echo 4x4 || echo 2x2x2)" --sweeps 40 --threads 1 \
    --format json >/dev/null 2>&1 || echo "exit $?" > "$out/$b.report.exit"
  if [ -f "$out/report-$b/report.json" ]; then
    mask < "$out/report-$b/report.json" > "$out/$b.report.json"
    mask < "$out/report-$b/report.md" > "$out/$b.report.md"
  fi
  rm -rf "$out/report-$b"
done
echo "snapshot in $out"
