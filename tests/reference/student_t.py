#!/usr/bin/env python3
"""Reference for stats::gum: two-sided Student t quantiles by scipy.

t.ppf((1 + p) / 2, nu) for every coverage probability p and degrees of
freedom nu below (integer and fractional nu, both sides of curlew's switch
from interpolation to the asymptotic series at nu = 41), plus the two
single values the GUM worked example checks.
Writes student_t.json into the folder given as argument (default: here).
"""
import json, os, sys
import scipy
from scipy.stats import t

ps = [0.68, 0.9, 0.95, 0.99, 0.9973]
nus = [1.0, 1.37, 2.5, 10.0, 19.0, 33.3, 39.9, 40.0, 41.7, 60.0, 100.0, 1e3, 1e5]
cases = [{"p": p, "nu": nu, "k": float(t.ppf(0.5 * (1 + p), nu))} for p in ps for nu in nus]
cases += [{"p": p, "nu": nu, "k": float(t.ppf(0.5 * (1 + p), nu))} for p, nu in [(0.95, 19.0), (0.99, 7.3)]]
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "call": "scipy.stats.t.ppf(0.5 * (1 + p), nu)",
    "cases": cases,
}
folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(folder, "student_t.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
