#!/usr/bin/env python3
"""Reference for synth's frame files: what pandas' C CSV parser (the reader
of the NumPy baseline in the benchmark) sees in one frame written by
`curlew synth`.

synth_wake_f00003.csv (committed beside this script) is frame 3 of the
0.3 m/s run of the unit test `pandas_reads_the_frames_as_the_bookkeeping_says`
(a 14 x 9 wake, 20 % gaps, seed 11); the test checks that synth still
writes exactly these bytes. The JSON records the row count, the empty u
cells, the sum of u, the smallest x and the largest y pandas reads.
Writes pandas_synth_frame.json into the folder given as argument (default: here).
"""
import json, os, sys
import pandas as pd

here = os.path.dirname(os.path.abspath(__file__))
folder = sys.argv[1] if len(sys.argv) > 1 else here
d = pd.read_csv(os.path.join(here, "synth_wake_f00003.csv"))
out = {
    "library": "pandas",
    "version": pd.__version__,
    "call": "pandas.read_csv('synth_wake_f00003.csv'): len(d), d.u.isna().sum(), d.u.sum(), d.x.min(), d.y.max()",
    "rows": len(d),
    "u_empty": int(d.u.isna().sum()),
    "u_sum": float(d.u.sum()),
    "x_min": float(d.x.min()),
    "y_max": float(d.y.max()),
}
with open(os.path.join(folder, "pandas_synth_frame.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
