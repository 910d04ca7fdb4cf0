#!/usr/bin/env bash
# Measures candump parsing + signal decoding in termvel and python-can's
# candump reader on the same 1 M-line log, in one run, and prints the ratio.
# Usage: scripts/throughput-vs-python-can.sh [LINES]   (needs python-can:
# pip install -r tests/requirements.txt, or a venv given as PYTHON=...).
set -euo pipefail
cd "$(dirname "$0")/.."
lines=${1:-1000000}
python=${PYTHON:-python3}
log=$(mktemp --suffix=.log)
trap 'rm -f "$log"' EXIT
# The demo's CAN lines, repeated with times moved on, so the frames are the
# demo signal map's own.
grep '^(' replays/demo.tvrec | "$python" -c '
import sys
lines = [l.rstrip("\n") for l in sys.stdin]
n = int(sys.argv[1]); out = sys.stdout; k = 0; shift = 0
while k < n:
    for l in lines:
        if k >= n: break
        t, rest = l[1:].split(")", 1)
        s, f = t.split(".")
        out.write("(%d.%s)%s\n" % (int(s) + shift, f, rest)); k += 1
    shift += 200
' "$lines" > "$log"
echo "log: $lines lines, $(du -h "$log" | cut -f1)"
cargo build -q --release --example parse-throughput
tv=$(target/release/examples/parse-throughput "$log")
echo "$tv"
py=$("$python" - "$log" <<'PY'
import sys, time, can
t = time.perf_counter(); n = 0
for m in can.io.CanutilsLogReader(sys.argv[1]):
    n += 1
dt = time.perf_counter() - t
print(f"python-can {can.__version__} CanutilsLogReader: {n} frames in {dt:.3f} s = {n/dt:.0f} frames/s")
PY
)
echo "$py"
raw=$(echo "$tv" | sed -n 's/.*raw.* = \([0-9]*\) frames\/s.*/\1/p')
rdr=$(echo "$tv" | sed -n 's/.*reader.* = \([0-9]*\) frames\/s.*/\1/p')
pyr=$(echo "$py" | sed -n 's/.* = \([0-9]*\) frames\/s.*/\1/p')
echo "ratio termvel/python-can: raw $(( raw / pyr ))x, reader $(( rdr / pyr ))x"
