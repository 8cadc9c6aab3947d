#!/usr/bin/env bash
# Compares two curlew binaries on one pipeline, for speed work on a noisy
# machine: N rounds, each running both binaries, alternating which goes
# first (A B, B A, ...) so that an order effect cancels; prints the minimum
# and median wall and user time of each, and whether their outputs
# (every run's ensemble.csv and frames.csv) are byte-identical.
# Usage: bench/ab.sh BIN_A BIN_B [PIPELINE] [N]
#   e.g. cp target/release/curlew /tmp/before; (change, build)
#        bench/ab.sh /tmp/before target/release/curlew bench-data/csv-1000/bench.toml 5
set -euo pipefail
A=${1:?usage: bench/ab.sh BIN_A BIN_B [PIPELINE] [N]}
B=${2:?usage: bench/ab.sh BIN_A BIN_B [PIPELINE] [N]}
PIPE=${3:-bench-data/csv-1000/bench.toml}
N=${4:-5}
OUT=$(mktemp -d)
trap 'rm -rf "$OUT"' EXIT
one() { # label binary
  rm -rf "$OUT/$1"
  /usr/bin/time -o "$OUT/t" -f "%e %U" "$2" run "$PIPE" --out "$OUT/$1" --quiet
  echo "$1 $(cat "$OUT/t")" >> "$OUT/log"
}
for r in $(seq "$N"); do
  if [ $((r % 2)) -eq 1 ]; then one A "$A"; one B "$B"; else one B "$B"; one A "$A"; fi
done
stat() { # column of the log, label -> "min median"
  local v
  v=$(grep "^$2 " "$OUT/log" | cut -d' ' -f"$1" | sort -n)
  echo "$(echo "$v" | head -1) $(echo "$v" | sed -n "$(( ($(echo "$v" | wc -l) + 1) / 2 ))p")"
}
for L in A B; do
  read -r wmin wmed <<< "$(stat 2 "$L")"
  read -r umin umed <<< "$(stat 3 "$L")"
  echo "$L: wall min $wmin s, median $wmed s; user min $umin s, median $umed s ($N runs)"
done
same=yes
while IFS= read -r f; do
  rel=${f#"$OUT/A/"}
  cmp -s "$f" "$OUT/B/$rel" || { echo "differs: $rel"; same=no; }
done < <(find "$OUT/A" \( -name ensemble.csv -o -name frames.csv \))
echo "outputs byte-identical: $same"
