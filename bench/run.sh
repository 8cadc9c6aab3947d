#!/usr/bin/env bash
# The curlew benchmark (issue #7): generates a 1000-frame campaign of
# 128 x 96 vectors with `curlew synth` (CSV, and the same as one parquet long
# table), then times side by side, in one run on this machine:
#   1. curlew run on the CSV campaign
#   2. the NumPy/pandas reduction of the same campaign (bench/numpy_reduce.py)
#   3. curlew run on the parquet table, and a decode-only pass over it
#   4. curlew run on 4000 frames (peak memory must not grow with frames)
# and checks that both implementations give the same ensemble.
# Every timing is repeated REPEAT times (default 3; the machine is shared, so
# single runs vary by 20 % and more) and summarised as min and median.
# Usage: bench/run.sh [FRAMES]   (results printed; copy them into BENCHMARKS.md)
#        REPEAT=5 MEM_FRAMES=4000 bench/run.sh
set -euo pipefail
cd "$(dirname "$0")/.."
FRAMES=${1:-1000}
DATA=bench-data
BIN=target/release/curlew
cargo build --release --quiet --bin curlew --example decode
mkdir -p "$DATA"
python3 -c "import numpy, pandas" 2>/dev/null || python3 -m pip install --quiet numpy pandas

REPEAT=${REPEAT:-3}
MEM_FRAMES=${MEM_FRAMES:-4000}
LOG=$(mktemp)
# t LABEL CMD...: runs CMD REPEAT times, logs "LABEL wall_s user_s sys_s peak_kb"
t() {
  local label=$1; shift
  for _ in $(seq "$REPEAT"); do
    /usr/bin/time -o "$LOG.one" -f "%e %U %S %M" "$@" > /dev/null
    echo "$label $(cat "$LOG.one")" | tee -a "$LOG"
  done
}

if [ ! -d "$DATA/csv-$FRAMES" ]; then
  "$BIN" synth wake --out "$DATA/csv-$FRAMES" --frames "$FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7
fi
if [ ! -d "$DATA/pq-$FRAMES" ]; then
  "$BIN" synth wake --out "$DATA/pq-$FRAMES" --frames "$FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7 --format parquet
fi
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "rustc: $(rustc --version); python: $(python3 --version 2>&1); numpy $(python3 -c 'import numpy; print(numpy.__version__)'); pandas $(python3 -c 'import pandas; print(pandas.__version__)')"
echo "data: $FRAMES frames of 128 x 96 = $((FRAMES * 128 * 96)) vectors; CSV $(du -sh "$DATA/csv-$FRAMES" | cut -f1), parquet $(du -sh "$DATA/pq-$FRAMES" | cut -f1)"

PIPE_CSV="$DATA/csv-$FRAMES/pipeline.toml"
PIPE_PQ="$DATA/pq-$FRAMES/pipeline.toml"
BENCH_CSV="$DATA/csv-$FRAMES/bench.toml"
BENCH_PQ="$DATA/pq-$FRAMES/bench.toml"
# The reduction both implementations do: median test, neighbour-mean fill,
# least-squares vorticity, ensemble statistics (no figures, no smoothing).
python3 bench/bench_pipeline.py "$PIPE_CSV" > "$BENCH_CSV"
python3 bench/bench_pipeline.py "$PIPE_PQ" > "$BENCH_PQ"

echo "== label wall_s user_s sys_s peak_KB"
# interleaved, so that a slow spell of the shared machine hits all alike
for _ in $(seq "$REPEAT"); do
  REPEAT=1 t curlew-csv "$BIN" run "$BENCH_CSV" --out "$DATA/out-csv" --quiet
  REPEAT=1 t numpy-csv python3 bench/numpy_reduce.py "$BENCH_CSV" "$DATA/out-numpy.csv"
  REPEAT=1 t curlew-parquet "$BIN" run "$BENCH_PQ" --out "$DATA/out-pq" --quiet
  REPEAT=1 t decode-parquet target/release/examples/decode "$BENCH_PQ"
done
echo "== agreement"
python3 bench/compare.py "$DATA/out-csv" "$DATA/out-numpy.csv"

echo "== memory: curlew run on $MEM_FRAMES frames (CSV)"
if [ ! -d "$DATA/csv-$MEM_FRAMES" ]; then
  "$BIN" synth wake --out "$DATA/csv-$MEM_FRAMES" --frames "$MEM_FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7
fi
python3 bench/bench_pipeline.py "$DATA/csv-$MEM_FRAMES/pipeline.toml" > "$DATA/csv-$MEM_FRAMES/bench.toml"
REPEAT=1 t "curlew-csv-$MEM_FRAMES" "$BIN" run "$DATA/csv-$MEM_FRAMES/bench.toml" --out "$DATA/out-$MEM_FRAMES" --quiet

echo "== summary (min and median of wall s; peak RSS max)"
awk '{w[$1]=w[$1]" "$2; if ($5>m[$1]) m[$1]=$5} END {for (k in w) print k, w[k], "|", m[k], "KB"}' "$LOG" |
  while read -r label rest; do
    walls=$(echo "$rest" | cut -d'|' -f1)
    peak=$(echo "$rest" | cut -d'|' -f2)
    sorted=$(echo $walls | tr ' ' '\n' | sort -n)
    n=$(echo "$sorted" | wc -l)
    min=$(echo "$sorted" | head -1)
    med=$(echo "$sorted" | sed -n "$(( (n + 1) / 2 ))p")
    echo "$label: min $min s, median $med s (of $n), peak$peak"
  done | sort
rm -f "$LOG" "$LOG.one"
