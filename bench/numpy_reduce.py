#!/usr/bin/env python3
"""The NumPy/pandas reduction curlew is benchmarked against (issue #7).

Written as a competent practitioner would script it: pandas' C CSV parser,
whole-array NumPy operations, no Python loops over nodes. It does the same
work as the benchmark pipeline (bench/bench_pipeline.py) asks of curlew:

1. read every frame, place the vectors on the regular grid (SI units);
   empty cells and missing rows are invalid vectors;
2. the normalized median test (Westerweel & Scarano 2005): 3 x 3
   neighbourhood without the centre, valid neighbours only, at least 3 of
   them, eps = 0.1 px of displacement, threshold 2, a vector rejected when
   either component exceeds it;
3. neighbour-mean filling in rounds (holes with the most neighbours that
   carry values first, all of one round from the same state), at least 2
   neighbours, holes further than 3 nodes from a valid vector left empty;
4. out-of-plane vorticity with the least-squares 4-point stencil
   (2f2 + f1 - f-1 - 2f-2)/(10h), falling back to central, then 2nd-order
   one-sided, then 1st-order one-sided differences where the wider stencil
   does not fit;
5. ensemble mean, standard deviation (n - 1) and u'v' covariance over the
   valid samples per node, and the mean and standard deviation of the
   vorticity over the nodes that were valid with a finite vorticity.

Usage: numpy_reduce.py PIPELINE.toml OUT.csv
"""
import glob
import os
import re
import sys
import tomllib

import numpy as np
import pandas as pd


def natural_key(s):
    return [int(t) if t.isdigit() else t for t in re.split(r"(\d+)", s)]


def load(pipeline):
    with open(pipeline, "rb") as f:
        p = tomllib.load(f)
    base = os.path.dirname(os.path.abspath(pipeline))
    inp = p.get("input", {})
    run = p["run"][0]
    inp = {**inp, **run.get("input", {})}
    lu = {"m": 1.0, "mm": 1e-3}.get(inp.get("length_unit", "m"), inp.get("pixel_size"))
    vu = inp.get("velocity_unit", "m/s")
    px_vel = inp["pixel_size"] / inp["pulse_separation"]
    vs = {"m/s": 1.0, "mm/s": 1e-3}.get(vu, px_vel)
    files = sorted(glob.glob(os.path.join(base, run["frames"])), key=natural_key)
    return files, lu, vs, 0.1 * px_vel


def neighbours(a, fill=np.nan):
    """The 8 neighbours of every node, shape (8, ny, nx), `fill` outside."""
    ny, nx = a.shape
    p = np.pad(a, 1, constant_values=fill)
    return np.stack([p[1 + dj:1 + dj + ny, 1 + di:1 + di + nx]
                     for dj in (-1, 0, 1) for di in (-1, 0, 1) if (dj, di) != (0, 0)])


def median_test(u, v, valid, eps, thr=2.0, min_nb=3):
    nbv = neighbours(valid, False)
    enough = nbv.sum(axis=0) >= min_nb
    bad = np.zeros_like(valid)
    for c in (u, v):
        nb = np.where(nbv, neighbours(c), np.nan)
        with np.errstate(all="ignore"):
            um = np.nanmedian(nb, axis=0)
            rm = np.nanmedian(np.abs(nb - um), axis=0)
            r0 = np.abs(c - um) / (rm + eps)
        bad |= r0 > thr
    return valid & enough & bad


def distance_to_valid(valid, limit):
    """Chebyshev distance (in nodes) to the nearest valid node, capped."""
    d = np.where(valid, 0, limit + 1)
    for _ in range(limit):
        nb = neighbours(d.astype(float), np.inf).min(axis=0)
        d = np.minimum(d, nb + 1).astype(int)
    return d


def fill(u, v, valid, min_nb=2, max_dist=3):
    has = valid.copy()
    reach = distance_to_valid(valid, max_dist) <= max_dist
    u = np.where(has, u, np.nan)
    v = np.where(has, v, np.nan)
    while True:
        nbh = neighbours(has, False)
        cnt = np.where(~has & reach, nbh.sum(axis=0), 0)
        c = cnt.max()
        if c < min_nb:
            break
        sel = cnt == c
        for a in (u, v):
            nb = np.where(nbh, neighbours(a), 0.0)
            a[sel] = nb.sum(axis=0)[sel] / c
        has = has | sel
    return u, v, has


def ddx(a, h, axis):
    """d a / d(axis) with the least-squares stencil and its fallbacks."""
    a = np.moveaxis(a, axis, 1)
    ny, n = a.shape
    p = np.pad(a, ((0, 0), (2, 2)), constant_values=np.nan)
    f = {k: p[:, 2 + k:2 + k + n] for k in range(-2, 3)}
    ok = {k: np.isfinite(f[k]) for k in f}
    out = np.full(a.shape, np.nan)
    cands = [
        ((ok[-2] & ok[-1] & ok[0] & ok[1] & ok[2]), (2 * f[2] + f[1] - f[-1] - 2 * f[-2]) / (10 * h)),
        ((ok[-1] & ok[1] & ok[0]), (f[1] - f[-1]) / (2 * h)),
        ((ok[0] & ok[1] & ok[2]), (-3 * f[0] + 4 * f[1] - f[2]) / (2 * h)),
        ((ok[0] & ok[-1] & ok[-2]), (3 * f[0] - 4 * f[-1] + f[-2]) / (2 * h)),
        ((ok[0] & ok[1]), (f[1] - f[0]) / h),
        ((ok[0] & ok[-1]), (f[0] - f[-1]) / h),
    ]
    done = np.zeros(a.shape, bool)
    for m, val in cands:
        m = m & ~done
        out[m] = val[m]
        done |= m
    return np.moveaxis(out, 1, axis)


def main():
    files, ls, vs, eps = load(sys.argv[1])
    first = pd.read_csv(files[0], engine="c")
    xs = np.unique(np.round(first["x"].to_numpy() * ls, 9))
    ys = np.unique(np.round(first["y"].to_numpy() * ls, 9))
    nx, ny = len(xs), len(ys)
    dx, dy = np.median(np.diff(xs)), np.median(np.diff(ys))
    x0, y0 = xs[0], ys[0]
    sums = {k: np.zeros((ny, nx)) for k in ("n", "u", "v", "uu", "vv", "uv", "no", "o", "oo")}
    # Welford-free two-moment sums in float64, centred on the first frame's
    # values to keep the cancellation small (a practitioner's usual trick).
    ref_u = ref_v = None
    for fpath in files:
        df = pd.read_csv(fpath, engine="c")
        ix = np.rint((df["x"].to_numpy() * ls - x0) / dx).astype(int)
        iy = np.rint((df["y"].to_numpy() * ls - y0) / dy).astype(int)
        u = np.full((ny, nx), np.nan)
        v = np.full((ny, nx), np.nan)
        u[iy, ix] = pd.to_numeric(df["u"], errors="coerce").to_numpy() * vs
        v[iy, ix] = pd.to_numeric(df["v"], errors="coerce").to_numpy() * vs
        valid = np.isfinite(u) & np.isfinite(v)
        valid &= ~median_test(u, v, valid, eps)
        uf, vf, _ = fill(u, v, valid)
        omega = ddx(vf, dx, 1) - ddx(uf, dy, 0)
        if ref_u is None:
            ref_u = np.where(valid, u, 0.0)
            ref_v = np.where(valid, v, 0.0)
        du = np.where(valid, u - ref_u, 0.0)
        dv = np.where(valid, v - ref_v, 0.0)
        sums["n"] += valid
        sums["u"] += du
        sums["v"] += dv
        sums["uu"] += du * du
        sums["vv"] += dv * dv
        sums["uv"] += du * dv
        ov = valid & np.isfinite(omega)
        o = np.where(ov, omega, 0.0)
        sums["no"] += ov
        sums["o"] += o
        sums["oo"] += o * o
    with np.errstate(all="ignore"):
        n = sums["n"]
        mu, mv = sums["u"] / n, sums["v"] / n
        out = pd.DataFrame({
            "x": np.tile(x0 + dx * np.arange(nx), ny),
            "y": np.repeat(y0 + dy * np.arange(ny), nx),
            "n_valid": n.ravel(),
            "u_mean": (ref_u + mu).ravel(),
            "v_mean": (ref_v + mv).ravel(),
            "u_std": np.sqrt((sums["uu"] - n * mu * mu) / (n - 1)).ravel(),
            "v_std": np.sqrt((sums["vv"] - n * mv * mv) / (n - 1)).ravel(),
            "uv_cov": ((sums["uv"] - n * mu * mv) / (n - 1)).ravel(),
            "omega_mean": (sums["o"] / sums["no"]).ravel(),
            "omega_std": np.sqrt((sums["oo"] - sums["o"] ** 2 / sums["no"]) / (sums["no"] - 1)).ravel(),
        })
    out.to_csv(sys.argv[2], index=False)


if __name__ == "__main__":
    main()
