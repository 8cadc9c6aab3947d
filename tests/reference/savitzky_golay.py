#!/usr/bin/env python3
"""Reference for the Savitzky-Golay stencils (stencil::smooth, stencil::lsq).

1. Two-dimensional smoothing weights: the first row of numpy.linalg.pinv
   of the monomial matrix of a (2m+1)^2 window and total degree p (the
   centre value of the least-squares fit), row major over the window.
2. One-dimensional first-derivative weights:
   scipy.signal.savgol_coeffs(window, order, deriv=1, use="dot").
Writes savitzky_golay.json into the folder given as argument (default: here).
"""
import json, os, sys
import numpy as np, scipy
from scipy.signal import savgol_coeffs


def smoothing(m, p):
    pts = [(j, i) for j in range(-m, m + 1) for i in range(-m, m + 1)]
    terms = [(d - b, b) for d in range(p + 1) for b in range(d + 1)]
    a = np.array([[i**ea * j**eb for (ea, eb) in terms] for (j, i) in pts], float)
    return np.linalg.pinv(a)[0].tolist()


out = {
    "library": "numpy, scipy",
    "version": "numpy %s, scipy %s" % (np.__version__, scipy.__version__),
    "call": "numpy.linalg.pinv(monomials)[0]; scipy.signal.savgol_coeffs(w, o, deriv=1, use='dot')",
    "smoothing": [{"m": m, "p": p, "weights": smoothing(m, p)} for m, p in [(1, 1), (2, 2), (2, 3), (3, 4)]],
    "derivative": [
        {"window": w, "order": o, "weights": savgol_coeffs(w, o, deriv=1, use="dot").tolist()}
        for w, o in [(5, 1), (5, 2), (7, 1), (7, 2), (7, 3), (7, 4)]
    ],
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "savitzky_golay.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
