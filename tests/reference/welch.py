"""Reference values for curlew's Welch PSD (tests/it/spectra.rs):
scipy.signal.welch with its defaults (periodic Hann window, 50 % overlap,
constant detrend, one-sided density) on a deterministic series: two tones
plus a scatter from the fractional part of a scaled sine (a common hash).
The series is written into the JSON too, so the test uses exactly it.
"""
import json
import os
import sys

import numpy as np
import scipy
import scipy.signal

fs = 50.0
n = 1000
t = np.arange(n) / fs
h = np.sin(12.9898 * (np.arange(n) + 1)) * 43758.5453
x = 0.3 + np.sin(2 * np.pi * 3.1 * t) + 0.25 * np.cos(2 * np.pi * 11.7 * t + 0.3) + 0.5 * (h - np.floor(h) - 0.5)
cases = {}
for nperseg in (128, 100):
    f, p = scipy.signal.welch(x, fs=fs, nperseg=nperseg)
    cases[str(nperseg)] = {"freq": f.tolist(), "psd": p.tolist(), "noverlap": nperseg // 2}
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "numpy_version": np.__version__,
    "python": sys.version.split()[0],
    "call": "scipy.signal.welch(x, fs=50.0, nperseg=N) (window='hann', noverlap=N//2, detrend='constant', scaling='density')",
    "fs": fs,
    "x": x.tolist(),
    "cases": cases,
}
# Into the folder given (.ci/check-references passes a temporary one), else
# beside this script.
path = (os.path.join(sys.argv[1], "welch.json") if len(sys.argv) > 1
        else __file__.rsplit(".", 1)[0] + ".json")
with open(path, "w") as fh:
    json.dump(out, fh, indent=1, sort_keys=True)
