#!/usr/bin/env python3
"""Reference for stencil::pls: the orthonormal 2-D DCT-II by scipy.

A 5 x 7 array of uniform values in [-1, 1) (numpy PCG64, seed 41), row
major, and its scipy.fft.dctn(type=2, norm="ortho"), row major.
Writes dct.json into the folder given as argument (default: here).
"""
import json, os, sys
import numpy as np, scipy
import scipy.fft

a = np.random.default_rng(41).uniform(-1.0, 1.0, (5, 7))
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "call": "scipy.fft.dctn(a, type=2, norm='ortho')",
    "shape": [5, 7],
    "input": a.ravel().tolist(),
    "output": scipy.fft.dctn(a, type=2, norm="ortho").ravel().tolist(),
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "dct.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
