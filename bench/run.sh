#!/usr/bin/env bash
# The curlew benchmark (issue #7): generates a 1000-frame campaign of
# 128 x 96 vectors with `curlew synth` (CSV, and the same as one parquet long
# table), then times side by side, in one run on this machine:
#   1. curlew run on the CSV campaign
#   2. the NumPy/pandas reduction of the same campaign (bench/numpy_reduce.py)
#   3. curlew run on the parquet table, and a decode-only pass over it
#   4. curlew run on 4000 frames (peak memory must not grow with frames)
# and checks that both implementations give the same ensemble.
# Usage: bench/run.sh [FRAMES]   (results printed; copy them into BENCHMARKS.md)
set -euo pipefail
cd "$(dirname "$0")/.."
FRAMES=${1:-1000}
DATA=bench-data
BIN=target/release/curlew
cargo build --release --quiet --bin curlew --example decode
mkdir -p "$DATA"
python3 -c "import numpy, pandas" 2>/dev/null || python3 -m pip install --quiet numpy pandas

t() { /usr/bin/time -f "%e s wall, %M KB peak RSS" "$@"; }

if [ ! -d "$DATA/csv-$FRAMES" ]; then
  "$BIN" synth wake --out "$DATA/csv-$FRAMES" --frames "$FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7
fi
if [ ! -d "$DATA/pq-$FRAMES" ]; then
  "$BIN" synth wake --out "$DATA/pq-$FRAMES" --frames "$FRAMES" --nx 128 --ny 96 --pitch-mm 0.75 --speeds 0.15 --seed 7 --format parquet
fi
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "rustc: $(rustc --version); python: $(python3 --version 2>&1); numpy $(python3 -c 'import numpy; print(numpy.__version__)'); pandas $(python3 -c 'import pandas; print(pandas.__version__)')"
echo "data: $FRAMES frames of 128 x 96 = $((FRAMES * 128 * 96)) vectors; CSV $(du -sh "$DATA/csv-$FRAMES" | cut -f1), parquet $(du -sh "$DATA/pq-$FRAMES" | cut -f1)"

PIPE_CSV=$(ls "$DATA/csv-$FRAMES"/*.toml | head -1)
PIPE_PQ=$(ls "$DATA/pq-$FRAMES"/*.toml | head -1)
BENCH_CSV="$DATA/csv-$FRAMES/bench.toml"
BENCH_PQ="$DATA/pq-$FRAMES/bench.toml"
# The reduction both implementations do: median test, neighbour-mean fill,
# least-squares vorticity, ensemble statistics (no figures, no smoothing).
python3 bench/bench_pipeline.py "$PIPE_CSV" > "$BENCH_CSV"
python3 bench/bench_pipeline.py "$PIPE_PQ" > "$BENCH_PQ"

echo "== curlew run (CSV)"
t "$BIN" run "$BENCH_CSV" --out "$DATA/out-csv" --quiet
echo "== numpy/pandas reduction (CSV)"
t python3 bench/numpy_reduce.py "$BENCH_CSV" "$DATA/out-numpy.csv"
echo "== agreement"
python3 bench/compare.py "$DATA/out-csv" "$DATA/out-numpy.csv"
echo "== curlew run (parquet)"
t "$BIN" run "$BENCH_PQ" --out "$DATA/out-pq" --quiet
echo "== decode only (parquet)"
t target/release/examples/decode "$BENCH_PQ"
