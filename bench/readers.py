"""Converts a `curlew synth` CSV campaign (one file per frame) into the same
frames as MAT version 5 files (scipy.io.savemat, uncompressed), MAT version 7
(compressed), NetCDF-3 per frame and one NetCDF-3 file with a time dimension
(scipy.io.netcdf_file), and writes a pipeline for each beside the CSV one, so
that bench/readers.sh can time the readers side by side on identical values.

Usage: python3 bench/readers.py CAMPAIGN_DIR RUN_ID
"""
import glob
import re
import os
import sys

import numpy as np
from scipy.io import netcdf_file, savemat

root, run = sys.argv[1], sys.argv[2]
files = sorted(f for f in glob.glob(os.path.join(root, run, "f*.csv")) if os.path.basename(f)[1:2].isdigit())
pipe = open(os.path.join(root, "pipeline.toml")).read()
frames = []
for f in files:
    a = np.genfromtxt(f, delimiter=",", names=True)
    xs, ys = np.unique(a["x"]), np.unique(a["y"])
    ix = np.searchsorted(xs, a["x"])
    iy = np.searchsorted(ys, a["y"])
    U = np.full((ys.size, xs.size), np.nan)
    V = np.full((ys.size, xs.size), np.nan)
    U[iy, ix] = a["u"]
    V[iy, ix] = a["v"]
    frames.append((os.path.splitext(os.path.basename(f))[0], xs, ys, U, V))

for kind in ("mat5", "mat7", "nc"):
    d = os.path.join(root, f"{run}-{kind}")
    os.makedirs(d, exist_ok=True)
    for name, xs, ys, U, V in frames:
        if kind == "nc":
            with netcdf_file(os.path.join(d, name + ".nc"), "w") as nc:
                nc.createDimension("y", ys.size)
                nc.createDimension("x", xs.size)
                for nm, arr, dims in (("x", xs, ("x",)), ("y", ys, ("y",)), ("u", U, ("y", "x")), ("v", V, ("y", "x"))):
                    var = nc.createVariable(nm, "d", dims)
                    var[:] = arr
        else:
            savemat(os.path.join(d, name + ".mat"),
                    {"x": xs.reshape(1, -1), "y": ys.reshape(-1, 1), "u": U, "v": V},
                    format="5", do_compression=(kind == "mat7"))
    fmt = "netcdf" if kind == "nc" else "mat"
    ext = "nc" if kind == "nc" else "mat"
    p = pipe.replace('format = "csv"', f'format = "{fmt}"')
    p = re.sub(rf'frames = "{run}/[^"]*"', f'frames = "{run}-{kind}/f*.{ext}"', p)
    assert p != pipe, "the pipeline's frames or format line was not found"
    open(os.path.join(root, f"pipeline-{kind}.toml"), "w").write(p)
print(f"{len(frames)} frames converted")
