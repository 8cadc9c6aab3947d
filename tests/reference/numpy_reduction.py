#!/usr/bin/env python3
"""Reference for a whole run: the benchmark's NumPy/pandas reduction
(bench/numpy_reduce.py: normalized median test, neighbour-mean fill,
least-squares vorticity, ensemble statistics, written with whole-array
numpy operations) of a `curlew synth` wake.

Makes the campaign with the curlew binary named by $CURLEW (synth is
deterministic: the test makes the same one), writes the benchmark pipeline
with bench/bench_pipeline.py, reduces it with bench/numpy_reduce.py and
records the pipeline text and every column of the NumPy ensemble table
(empty or NaN cells as null).
Writes numpy_reduction.json into the folder given as argument (default: here).
"""
import csv, json, math, os, subprocess, sys, tempfile
import numpy as np, pandas as pd

SYNTH = ["synth", "wake", "--out", "c", "--frames", "12", "--speeds", "0.2", "--seed", "5",
         "--nx", "24", "--ny", "15"]

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.dirname(os.path.dirname(here))
folder = sys.argv[1] if len(sys.argv) > 1 else here
curlew = os.environ["CURLEW"]
with tempfile.TemporaryDirectory() as work:
    subprocess.run([curlew] + SYNTH, cwd=work, check=True, capture_output=True)
    bench = subprocess.run([sys.executable, os.path.join(root, "bench/bench_pipeline.py"), "c/pipeline.toml"],
                           cwd=work, check=True, capture_output=True, text=True).stdout
    with open(os.path.join(work, "c/bench.toml"), "w") as f:
        f.write(bench)
    subprocess.run([sys.executable, os.path.join(root, "bench/numpy_reduce.py"), "c/bench.toml", "np.csv"],
                   cwd=work, check=True)
    with open(os.path.join(work, "np.csv")) as f:
        rows = list(csv.reader(f))


def num(t):
    if t == "":
        return None
    x = float(t)
    return None if math.isnan(x) else x


out = {
    "library": "numpy, pandas",
    "version": "numpy %s, pandas %s" % (np.__version__, pd.__version__),
    "call": "bench/numpy_reduce.py c/bench.toml np.csv after curlew " + " ".join(SYNTH),
    "synth": SYNTH,
    "bench_toml": bench,
    "columns": {name: [num(r[k]) for r in rows[1:]] for k, name in enumerate(rows[0])},
}
with open(os.path.join(folder, "numpy_reduction.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
