"""The README's "after curlew" code, run by .ci/run: loads every output of a
small synthetic campaign in pandas, polars and xarray and checks that the
NetCDF fields equal the parquet tables.

usage: python3 tests/python/after_curlew.py PATH_TO_CURLEW_BINARY
"""
import os
import subprocess
import sys
import tempfile

import numpy as np

curlew = os.path.abspath(sys.argv[1])
work = tempfile.mkdtemp(prefix="curlew-after-")
run = lambda *a: subprocess.run([curlew, *a], cwd=work, check=True, capture_output=True)
run("synth", "wake", "--out", "c", "--frames", "24", "--speeds", "0.2", "--seed", "4")
run("run", "c/pipeline.toml", "--out", "out", "--quiet")
os.chdir(work)

# --- README: after curlew (begin) ---
import pandas as pd
import polars as pl
import xarray as xr

ens = pd.read_parquet("out/u020/ensemble.parquet")     # one row per node
ens_pl = pl.read_parquet("out/u020/ensemble.parquet")
frames = pd.read_csv("out/u020/frames.csv")             # one row per frame
phase = pd.read_parquet("out/u020/phase.parquet")       # one row per bin and node

ds = xr.open_dataset("out/u020/ensemble.nc")            # labelled 2-D fields on (y, x)
omega = ds["omega_mean"]                                # DataArray, units s-1
omega_unc = ds[omega.attrs["ancillary_variables"].split()[0]]
ph = xr.open_dataset("out/u020/phase.nc")               # (phase, y, x)
one_bin = ph["omega_mean"].sel(phase=ph.phase[0])
# --- README: after curlew (end) ---

ny, nx = ds.sizes["y"], ds.sizes["x"]
assert omega.dims == ("y", "x") and omega.attrs["units"] == "s-1"
assert ds.attrs["Conventions"] == "CF-1.8" and ds.attrs["source"].startswith("curlew ")
assert len(ens) == nx * ny and ens_pl.height == nx * ny
# node order: y outer, x inner, as in the tables
for name in [c for c in ens.columns if c not in ("x", "y")]:
    a = ds[name].values.ravel()
    b = ens[name].to_numpy(dtype=float)
    assert np.array_equal(a, b, equal_nan=True), name
    assert np.array_equal(ens_pl[name].to_numpy().astype(float), b, equal_nan=True), name
assert np.array_equal(np.tile(ds.x.values, ny), ens.x.to_numpy())
assert np.array_equal(np.repeat(ds.y.values, nx), ens.y.to_numpy())
assert np.array_equal(omega_unc.values.ravel(), ens.omega_mean_unc.to_numpy(), equal_nan=True)
bins = ph.sizes["phase"]
assert len(phase) == bins * nx * ny
assert np.array_equal(ph["u_mean"].values.ravel(), phase.u_mean.to_numpy(), equal_nan=True)
assert np.array_equal(ph.phase.values, phase.phase_deg.to_numpy()[:: nx * ny])
assert one_bin.shape == (ny, nx) and len(frames) == 24
print(f"after curlew: ensemble {ny} x {nx}, {bins} phase bins: NetCDF equals parquet (pandas, polars, xarray)")
