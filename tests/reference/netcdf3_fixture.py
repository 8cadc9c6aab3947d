"""NetCDF-3 fixtures written by scipy.io.netcdf_file, for curlew's reader
(src/io/netcdf/tests.rs). Writes netcdf3_fixture_v1.nc (classic, a record
dimension 'time' with two record variables and one fixed variable of each
numeric type) and netcdf3_fixture_v2.nc (64-bit offset, one record variable),
and netcdf3_fixture.json with the values as scipy reads them back (as
shortest round-trip strings, so a JSON parser cannot round them)."""
import json
import os
import sys

import numpy as np
import scipy
from scipy.io import netcdf_file

# The folder given (.ci/check-references passes a temporary one), else
# beside this script.
here = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
ny, nx, nt = 3, 4, 2
u = (np.arange(nt * ny * nx, dtype=np.float64).reshape(nt, ny, nx) * 0.125 - 1.0)
v = np.sin(np.arange(nt * ny * nx, dtype=np.float64)).reshape(nt, ny, nx)
x = np.linspace(0.0, 3.0e-3, nx)
s = np.arange(ny * nx, dtype=np.int16).reshape(ny, nx) - 5
f = (np.arange(nx, dtype=np.float32) / np.float32(3.0))
b = np.array([-3, 0, 7], dtype=np.int8)

with netcdf_file(os.path.join(here, "netcdf3_fixture_v1.nc"), "w", version=1) as nc:
    nc.title = "curlew reader fixture"
    nc.createDimension("time", None)
    nc.createDimension("y", ny)
    nc.createDimension("x", nx)
    vx = nc.createVariable("x", "d", ("x",))
    vx[:] = x
    vx.units = "m"
    vu = nc.createVariable("u", "d", ("time", "y", "x"))
    vu[:] = u
    vu.units = "m/s"
    vv = nc.createVariable("v", "d", ("time", "y", "x"))
    vv[:] = v
    nc.createVariable("s", "h", ("y", "x"))[:] = s
    nc.createVariable("f", "f", ("x",))[:] = f
    nc.createVariable("b", "b", ("y",))[:] = b

with netcdf_file(os.path.join(here, "netcdf3_fixture_v2.nc"), "w", version=2) as nc:
    nc.createDimension("time", None)
    nc.createDimension("x", nx)
    nc.createVariable("u", "d", ("time", "x"))[:] = u[:, 0, :]

with netcdf_file(os.path.join(here, "netcdf3_fixture_v1.nc"), "r", mmap=False) as nc:
    back = {k: [repr(float(z)) for z in nc.variables[k][:].astype(np.float64).ravel()] for k in ["x", "u", "v", "s", "f", "b"]}
    title = nc.title.decode()
out = {
    "library": "scipy",
    "version": scipy.__version__,
    "call": "scipy.io.netcdf_file(path, 'w', version=1 and 2); values read back with netcdf_file(path, 'r')",
    "title": title,
    "shape_u": [nt, ny, nx],
    "values": back,
    "v2_u": [repr(float(z)) for z in u[:, 0, :].ravel()],
}
with open(os.path.join(here, "netcdf3_fixture.json"), "w") as fh:
    json.dump(out, fh, indent=1, sort_keys=True)
