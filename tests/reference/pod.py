"""Reference values for curlew's POD (tests/it/modes.rs): NumPy's SVD of the
fluctuation matrix of a small deterministic flow.

The flow: a grid of 8 x 6 nodes (u of every node, then v: 96 rows), frames
x_f = mean + sum_j c_j phi_j s_j(f) + e_f, with smooth spatial patterns
phi_j, sinusoidal time series s_j and a small deterministic scatter e_f
(the fractional part of a scaled sine, a common hash). The data are written
into the JSON too, so the test pushes exactly these numbers.

Cases: "exact" (24 frames: the fluctuations span 23 dimensions, fewer than
the sketch width 30, so the sketch is exact) and "wide" (160 frames: the
scatter spans all 96 dimensions, beyond the sketch width).

numpy.linalg.svd(Xc, full_matrices=False), Xc = X - X.mean(axis=1): the
energies are s**2 / (N - 1); each mode's sign is fixed so that its entry of
largest magnitude is positive (curlew's convention).
"""
import json
import os
import sys

import numpy as np

NX, NY = 8, 6


def frames(n_frames):
    i = np.arange(NX)[None, :] * np.ones((NY, 1))
    j = np.arange(NY)[:, None] * np.ones((1, NX))
    x, y = (i + 0.5) / NX, (j + 0.5) / NY
    pats = [
        (np.sin(np.pi * x) * np.cos(np.pi * y), np.cos(np.pi * x) * np.sin(np.pi * y)),
        (np.sin(2 * np.pi * x) * np.sin(np.pi * y), -np.cos(2 * np.pi * x) * np.cos(np.pi * y)),
        (np.cos(3 * np.pi * x) * y, np.sin(np.pi * y) * x),
        (x * y, x - y),
    ]
    amp = [1.0, 0.8, 0.35, 0.12]
    t = np.arange(n_frames)
    series = [
        np.sin(2 * np.pi * t / 12.0),
        np.cos(2 * np.pi * t / 12.0),
        np.sin(2 * np.pi * t / 7.3 + 0.4),
        np.cos(2 * np.pi * t / 4.1 + 1.0),
    ]
    rows = NX * NY
    X = np.zeros((2 * rows, n_frames))
    X[:rows, :] += 0.5
    X[rows:, :] += 0.05
    for (pu, pv), a, s in zip(pats, amp, series):
        X[:rows, :] += a * pu.reshape(-1)[:, None] * s[None, :]
        X[rows:, :] += a * pv.reshape(-1)[:, None] * s[None, :]
    r = np.arange(2 * rows)[:, None]
    f = np.arange(n_frames)[None, :]
    h = np.sin(12.9898 * (r + 1) + 78.233 * (f + 1)) * 43758.5453
    X += 0.02 * (h - np.floor(h) - 0.5)
    return X


def case(n_frames, keep):
    X = frames(n_frames)
    Xc = X - X.mean(axis=1, keepdims=True)
    U, s, _ = np.linalg.svd(Xc, full_matrices=False)
    modes = []
    for j in range(keep):
        m = U[:, j]
        if m[np.argmax(np.abs(m))] < 0:
            m = -m
        modes.append(m.tolist())
    return {
        "nx": NX,
        "ny": NY,
        "frames": n_frames,
        "data_rows_u_then_v_by_frame": X.T.tolist(),
        "energy": (s**2 / (n_frames - 1)).tolist(),
        "total_energy": float((Xc**2).sum() / (n_frames - 1)),
        "modes": modes,
    }


out = {
    "check_tolerance": {
        "rel": 1e-12,
        "abs": 1e-12,
        "why": "the modes past the fourth have near-equal singular values, so their "
               "vectors move by about eps / gap between BLAS builds and CPUs (2e-14 "
               "absolute seen, entries of order 0.01); the tests compare only "
               "separated modes, to 1e-6",
    },
    "library": "numpy",
    "version": np.__version__,
    "call": "numpy.linalg.svd(X - X.mean(axis=1, keepdims=True), full_matrices=False)",
    "python": sys.version.split()[0],
    "exact": case(24, 10),
    "wide": case(160, 10),
}
# Into the folder given (.ci/check-references passes a temporary one), else
# beside this script.
path = (os.path.join(sys.argv[1], "pod.json") if len(sys.argv) > 1
        else __file__.rsplit(".", 1)[0] + ".json")
with open(path, "w") as fh:
    json.dump(out, fh, indent=1, sort_keys=True)
