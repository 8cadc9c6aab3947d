#!/usr/bin/env bash
# Reader benchmark (issue #15): the same frames as CSV, MAT v5, MAT v7
# (compressed) and NetCDF-3, reduced by one curlew binary, interleaved and
# repeated; prints wall time and vectors per second per format and the
# ratio to CSV, and checks that every format gives the CSV's ensemble.csv.
# Usage: bench/readers.sh [FRAMES]   (default 300 frames of 128 x 96)
#        BIN=target/debug/curlew REPEAT=5 bench/readers.sh
set -euo pipefail
cd "$(dirname "$0")/.."
FRAMES=${1:-300}
BIN=${BIN:-target/release/curlew}
REPEAT=${REPEAT:-3}
DATA=bench-data/readers-$FRAMES
[ -x "$BIN" ] || cargo build --release --quiet --bin curlew
python3 -c "import numpy, scipy" 2>/dev/null || python3 -m pip install --quiet numpy scipy
if [ ! -d "$DATA" ]; then
  "$BIN" synth wake --out "$DATA" --frames "$FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7 --outliers 0 --gaps 0 > /dev/null
  python3 bench/readers.py "$DATA" u015
fi
echo "machine: $(nproc) cores; scipy $(python3 -c 'import scipy; print(scipy.__version__)'); $FRAMES frames of 128 x 96"
LOG=$(mktemp)
for _ in $(seq "$REPEAT"); do
  for k in csv mat5 mat7 nc; do
    p="$DATA/pipeline.toml"; [ "$k" = csv ] || p="$DATA/pipeline-$k.toml"
    rm -rf "$DATA/out-$k"
    /usr/bin/time -o "$LOG.one" -f "%e" "$BIN" run "$p" --out "$DATA/out-$k" --quiet
    echo "$k $(cat "$LOG.one")" | tee -a "$LOG"
  done
done
python3 - "$LOG" "$FRAMES" <<'PY'
import statistics, sys
t = {}
for line in open(sys.argv[1]):
    k, s = line.split()
    t.setdefault(k, []).append(float(s))
n = int(sys.argv[2]) * 128 * 96
base = statistics.median(t["csv"])
for k, v in t.items():
    m = statistics.median(v)
    print(f"{k:5s} median {m:6.2f} s  min {min(v):6.2f} s  {n / m / 1e6:5.2f} M vectors/s  time / csv {m / base:4.2f}")
PY
for k in mat5 mat7 nc; do
  if cmp -s "$DATA/out-csv/u015/ensemble.csv" "$DATA/out-$k/u015/ensemble.csv"; then
    echo "$k: ensemble.csv identical to the CSV run's"
  else
    echo "$k: ensemble.csv DIFFERS from the CSV run's"; exit 1
  fi
done
