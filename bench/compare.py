#!/usr/bin/env python3
"""Checks that curlew and the NumPy reduction computed the same ensemble.

Usage: compare.py CURLEW_OUT_DIR NUMPY.csv
Compares every column the NumPy reduction writes with curlew's ensemble.csv
of the first run; prints the largest difference relative to the column's
scale and the fraction of nodes that agree to 1e-9 of that scale.
Exits 1 when a velocity statistic disagrees beyond 1e-9 of its scale.
"""
import glob
import os
import sys

import numpy as np
import pandas as pd

cur_path = sorted(glob.glob(os.path.join(sys.argv[1], "*", "ensemble.csv")))[0]
cur = pd.read_csv(cur_path)
ref = pd.read_csv(sys.argv[2])
cur = cur.sort_values(["y", "x"]).reset_index(drop=True)
ref = ref.sort_values(["y", "x"]).reset_index(drop=True)
bad = False
for col in ref.columns:
    a, b = cur[col].to_numpy(float), ref[col].to_numpy(float)
    both = np.isfinite(a) & np.isfinite(b)
    scale = np.nanmax(np.abs(b)) or 1.0
    diff = np.abs(a - b)[both] / scale
    agree = np.mean(diff <= 1e-9) if diff.size else 1.0
    nan_mismatch = int(np.sum(np.isfinite(a) != np.isfinite(b)))
    print(f"{col:>12}: max |diff|/scale {diff.max() if diff.size else 0:.2e}, "
          f"{100 * agree:.2f} % of nodes within 1e-9, NaN mismatches {nan_mismatch}")
    if col in ("n_valid", "u_mean", "v_mean", "u_std", "v_std", "uv_cov") and (agree < 1.0 or nan_mismatch):
        bad = True
sys.exit(1 if bad else 0)
