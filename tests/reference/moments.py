#!/usr/bin/env python3
"""Reference for stats::moments: central sums and a co-moment by numpy.

A skewed sample (exponential, scale 0.5, shifted by 3; numpy's PCG64 with
seed 11), its mean, the central sums M_p = sum((x - mean)^p) for p = 2, 3,
4, and the co-moment of x with y = 2x + sin(x), taken from numpy.cov.
Writes moments.json into the folder given as argument (default: here).
"""
import json, os, sys
import numpy as np

x = np.random.default_rng(11).exponential(0.5, 500) + 3.0
d = x - x.mean()
y = 2 * x + np.sin(x)
out = {
    "library": "numpy",
    "version": np.__version__,
    "call": "x.mean(); ((x-x.mean())**p).sum() for p in 2,3,4; np.cov(x, 2*x+np.sin(x))[0,1]*(n-1)",
    "x": x.tolist(),
    "mean": float(x.mean()),
    "m2": float((d**2).sum()),
    "m3": float((d**3).sum()),
    "m4": float((d**4).sum()),
    "comoment": float(np.cov(x, y)[0, 1] * (len(x) - 1)),
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "moments.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
