"""Reference values for curlew's two-point correlations and integral scales
(tests/it/scales.rs): numpy.corrcoef of the pairwise-complete samples of
the probe node and every node, and the integral to the first zero crossing
by numpy.trapezoid, on a deterministic data set with gaps (a common hash,
the fractional part of a scaled sine, makes the scatter). The data go into
the JSON too (gaps as null), so the test uses exactly them.
"""
import json
import os
import sys

import numpy as np

nx, ny, nf = 9, 7, 80
dx, dy = 1.0e-3, 1.5e-3


def hsh(k):
    h = np.sin(12.9898 * (np.asarray(k, dtype=float) + 1.0)) * 43758.5453
    return h - np.floor(h)


x = np.arange(nx) * dx
y = np.arange(ny) * dy
X, Y = np.meshgrid(x, y)  # node k = j*nx + i
U, V, OK = [], [], []
for f in range(nf):
    a, b = hsh(7 * f) - 0.5, hsh(7 * f + 3) - 0.5
    k = np.arange(nx * ny) + 1000 * f
    u = 1.0 + a * np.cos(X / 4e-3 + f).ravel() + b * np.exp(-((X - 4e-3) ** 2) / 2e-5).ravel() + 0.2 * (hsh(k) - 0.5)
    v = -0.3 + b * np.sin(Y / 3e-3 + 0.5 * f).ravel() + 0.2 * (hsh(k + 500) - 0.5)
    ok = hsh(k + 777) > 0.08
    U.append(u)
    V.append(v)
    OK.append(ok)
U, V, OK = np.array(U), np.array(V), np.array(OK)
probes = [(4, 3), (0, 6)]


def pearson(a, b):
    return float(np.corrcoef(a, b)[0, 1])


def integral(side, d):
    """Trapezoid to the first zero crossing (linear), rho(0) = 1."""
    s = np.array(side, dtype=float)
    s[0] = 1.0
    for k in range(len(s) - 1):
        if not np.isfinite(s[k + 1]):
            return float(np.trapezoid(s[: k + 1], dx=d)), False
        if s[k + 1] <= 0.0:
            r0 = k * d + d * s[k] / (s[k] - s[k + 1])
            rr = np.append(np.arange(k + 1) * d, r0)
            return float(np.trapezoid(np.append(s[: k + 1], 0.0), rr)), True
    return float(np.trapezoid(s, dx=d)), False


cases = []
for (i0, j0) in probes:
    p = j0 * nx + i0
    out = {"i": i0, "j": j0}
    for name, A in (("u", U), ("v", V)):
        rho = []
        for q in range(nx * ny):
            m = OK[:, p] & OK[:, q]
            rho.append(pearson(A[m, p], A[m, q]) if m.sum() >= 3 else None)
        out["rho_" + name] = rho
        r = np.array([np.nan if z is None else z for z in rho]).reshape(ny, nx)
        lens = {}
        for ax, line, c0, d in (("x", r[j0, :], i0, dx), ("y", r[:, i0], j0, dy)):
            plus, minus = line[c0:], line[: c0 + 1][::-1]
            res = [integral(s, d) for s in (plus, minus) if len(s) > 1]
            hit = [L for L, h in res if h]
            lens[ax] = float(np.mean(hit)) if hit else float(np.mean([L for L, _ in res]))
        out["length_" + name] = lens
    cases.append(out)

res = {
    "library": "numpy",
    "version": np.__version__,
    "python": sys.version.split()[0],
    "call": "numpy.corrcoef(a[m, p], a[m, q])[0, 1] over frames m where both nodes are valid; numpy.trapezoid to the first zero crossing",
    "nx": nx, "ny": ny, "dx": dx, "dy": dy,
    "u": [[float(z) for z in row] for row in U],
    "v": [[float(z) for z in row] for row in V],
    "valid": [[bool(z) for z in row] for row in OK],
    "cases": cases,
}
path = (os.path.join(sys.argv[1], "correlation.json") if len(sys.argv) > 1
        else __file__.rsplit(".", 1)[0] + ".json")
with open(path, "w") as fh:
    json.dump(res, fh, indent=1, sort_keys=True)
