#!/usr/bin/env python3
"""Reference for stencil::smooth: scipy.ndimage.gaussian_filter.

A 30 x 34 array of uniform values in [-1, 1) (numpy PCG64, seed 61), row
major, filtered with sigma 0.8, 1.3 and 2.0 (truncate = 4.0, scipy's
default; the test compares interior nodes only, where the boundary mode
does not enter).
Writes gaussian_filter.json into the folder given as argument (default: here).
"""
import json, os, sys
import numpy as np, scipy
from scipy.ndimage import gaussian_filter

a = np.random.default_rng(61).uniform(-1.0, 1.0, (30, 34))
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "call": "scipy.ndimage.gaussian_filter(a, sigma)",
    "shape": [30, 34],
    "input": a.ravel().tolist(),
    "filtered": [{"sigma": s, "output": gaussian_filter(a, s).ravel().tolist()} for s in (0.8, 1.3, 2.0)],
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "gaussian_filter.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
