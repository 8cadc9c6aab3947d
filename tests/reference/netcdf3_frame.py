"""One PIV frame written three ways by reference libraries, for the reader
test in src/io/tests_gridded.rs: netcdf3_frame_grid.nc (scipy.io.netcdf_file;
u, v as 2-D arrays stored x first, shape (nx, ny), with 1-D x and y),
netcdf3_frame_long.nc (the same nodes as long vectors, rows shuffled) and
netcdf3_frame.csv (the same values as shortest round-trip decimals, numpy
repr). One vector is NaN (invalid). Writes netcdf3_frame.json with the
library and version."""
import json
import os
import sys

import numpy as np
import scipy
from scipy.io import netcdf_file

# The folder given (.ci/check-references passes a temporary one), else
# beside this script.
here = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
nx, ny = 5, 4
x = 1.0 + 0.5 * np.arange(nx)          # mm
y = -2.0 + 0.5 * np.arange(ny)
X, Y = np.meshgrid(x, y, indexing="ij")  # (nx, ny): x first
U = np.cos(X) * np.sin(Y) / 3.0
V = -np.sin(X) * np.cos(Y) / 7.0
U[2, 1] = np.nan

with netcdf_file(os.path.join(here, "netcdf3_frame_grid.nc"), "w", version=1) as nc:
    nc.createDimension("nx", nx)
    nc.createDimension("ny", ny)
    nc.createVariable("xc", "d", ("nx",))[:] = x
    nc.createVariable("yc", "d", ("ny",))[:] = y
    nc.createVariable("U", "d", ("nx", "ny"))[:] = U
    nc.createVariable("V", "d", ("nx", "ny"))[:] = V

order = np.random.default_rng(7).permutation(nx * ny)
with netcdf_file(os.path.join(here, "netcdf3_frame_long.nc"), "w", version=2) as nc:
    nc.createDimension("node", nx * ny)
    for name, a in [("xc", X), ("yc", Y), ("U", U), ("V", V)]:
        nc.createVariable(name, "d", ("node",))[:] = a.ravel()[order]

with open(os.path.join(here, "netcdf3_frame.csv"), "w") as fh:
    fh.write("xc,yc,U,V\n")
    for k in range(nx * ny):
        i, j = divmod(k, ny)
        cells = [repr(float(X[i, j])), repr(float(Y[i, j])), "" if np.isnan(U[i, j]) else repr(float(U[i, j])), repr(float(V[i, j]))]
        fh.write(",".join(cells) + "\n")

with open(os.path.join(here, "netcdf3_frame.json"), "w") as fh:
    json.dump({"library": "scipy", "version": scipy.__version__, "numpy": np.__version__,
               "call": "scipy.io.netcdf_file(path, 'w', version=1 | 2).createVariable"}, fh, indent=1, sort_keys=True)
