"""Four PIV frames in NetCDF-3 files of many frames, and the same frames one
per file, all written by scipy.io.netcdf_file, for the reader tests
(tests/it/formats.rs and src/io/tests_gridded.rs):

- nc_time/run.nc (classic format): u, v as record variables
  u(time, y, x) on the unlimited dimension `time`, x(x) and y(y) fixed,
  plus a record variable `time` in seconds;
- nc_time/long.nc (64-bit offset): a fixed-size time dimension and shuffled
  long vectors u(time, node), with x(node), y(node) the same for every
  frame;
- nc_time/frames/run_t0.nc .. run_t3.nc: each frame alone, u(y, x).

One vector per frame is NaN (invalid). Writes netcdf3_time.json with the
library, its version and the calls."""
import json
import os
import sys

import numpy as np
import scipy
from scipy.io import netcdf_file

here = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
out = os.path.join(here, "nc_time")
os.makedirs(os.path.join(out, "frames"), exist_ok=True)
nt, nx, ny = 4, 6, 5
x = 10.0 + 0.5 * np.arange(nx)          # mm
y = -1.0 + 0.5 * np.arange(ny)
X, Y = np.meshgrid(x, y)                # (ny, nx)
U = np.empty((nt, ny, nx))
V = np.empty((nt, ny, nx))
for k in range(nt):
    U[k] = 0.2 + np.sin(0.7 * X + 0.4 * k) * np.cos(Y) / 4.0
    V[k] = -np.cos(0.7 * X + 0.4 * k) * np.sin(Y) / 6.0
    U[k, 1 + k % 3, 2 + k] = np.nan

with netcdf_file(os.path.join(out, "run.nc"), "w", version=1) as nc:
    nc.createDimension("time", None)
    nc.createDimension("y", ny)
    nc.createDimension("x", nx)
    nc.createVariable("x", "d", ("x",))[:] = x
    nc.createVariable("y", "d", ("y",))[:] = y
    t = nc.createVariable("time", "d", ("time",))
    t.units = "s"
    u = nc.createVariable("u", "d", ("time", "y", "x"))
    v = nc.createVariable("v", "d", ("time", "y", "x"))
    for k in range(nt):
        t[k] = 0.01 * k
        u[k] = U[k]
        v[k] = V[k]

order = np.random.default_rng(5).permutation(nx * ny)
with netcdf_file(os.path.join(out, "long.nc"), "w", version=2) as nc:
    nc.createDimension("time", nt)
    nc.createDimension("node", nx * ny)
    nc.createVariable("x", "d", ("node",))[:] = X.ravel()[order]
    nc.createVariable("y", "d", ("node",))[:] = Y.ravel()[order]
    nc.createVariable("u", "d", ("time", "node"))[:] = U.reshape(nt, -1)[:, order]
    nc.createVariable("v", "d", ("time", "node"))[:] = V.reshape(nt, -1)[:, order]

for k in range(nt):
    with netcdf_file(os.path.join(out, "frames", f"run_t{k}.nc"), "w", version=1) as nc:
        nc.createDimension("y", ny)
        nc.createDimension("x", nx)
        nc.createVariable("x", "d", ("x",))[:] = x
        nc.createVariable("y", "d", ("y",))[:] = y
        nc.createVariable("u", "d", ("y", "x"))[:] = U[k]
        nc.createVariable("v", "d", ("y", "x"))[:] = V[k]

with open(os.path.join(here, "netcdf3_time.json"), "w") as fh:
    json.dump({"library": "scipy", "version": scipy.__version__, "numpy": np.__version__,
               "call": "scipy.io.netcdf_file(path, 'w', version=1 | 2).createVariable; "
                       "createDimension('time', None) for the record dimension",
               "frames": nt, "nx": nx, "ny": ny,
               "u_sum": float(repr(float(np.nansum(U))))}, fh, indent=1, sort_keys=True)
