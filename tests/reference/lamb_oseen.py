#!/usr/bin/env python3
"""Reference for the Lamb-Oseen vortex (synth::flows): the radius and value
of the peak swirl by scipy.optimize.minimize_scalar (bounded) on the
profile u_theta(r) = (1 - exp(-r^2)) / r (core radius 1, circulation 2 pi),
written here independently of curlew.
Writes lamb_oseen.json into the folder given as argument (default: here).
"""
import json, os, sys
import numpy as np, scipy
from scipy.optimize import minimize_scalar

res = minimize_scalar(lambda r: -(1 - np.exp(-r * r)) / r, bounds=(0.5, 2.0), method="bounded",
                      options={"xatol": 1e-12})
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "call": "scipy.optimize.minimize_scalar(-(1-exp(-r^2))/r, bounds=(0.5, 2), method='bounded', xatol=1e-12)",
    "radius": float(res.x),
    "swirl": float(-res.fun),
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "lamb_oseen.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
