"""One PIV frame written as MATLAB MAT files by scipy.io.savemat, for the
reader test in src/io/tests_mat.rs:

- mat_frame_v5.mat (do_compression=False): u, v as 2-D double arrays of
  MATLAB's shape (ny, nx) (rows are y), x a 1 x nx row vector, y an
  ny x 1 column vector;
- mat_frame_v7.mat (do_compression=True, every variable a zlib-compressed
  element as MATLAB's version 7 writes): the same nodes as long vectors
  (n x 1 columns, rows shuffled), u and v in single precision, and an
  int16 flag vector marking one vector invalid;
- mat_frame.csv: the same values as shortest round-trip decimals (numpy
  repr; the single-precision values widened exactly to double).

One vector is NaN (invalid) in both. For the end-to-end test
(tests/it/formats.rs), mat_run/f1..f3.mat are three frames of one run
(f1 uncompressed 2-D, f2 compressed 2-D, f3 compressed long vectors, all
double) and mat_run/f1..f3.csv the same values as text. Writes mat_frame.json with the library,
its version, the calls and the values' checksums."""
import hashlib
import json
import os
import sys

import numpy as np
import scipy
from scipy.io import savemat

here = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
nx, ny = 6, 4
x = -1.0 + 0.25 * np.arange(nx)          # mm
y = 3.0 + 0.25 * np.arange(ny)
X, Y = np.meshgrid(x, y)                 # (ny, nx): rows are y
U = np.sin(X) * np.cos(Y) / 3.0
V = -np.cos(X) * np.sin(Y) / 5.0
U[1, 3] = np.nan

savemat(os.path.join(here, "mat_frame_v5.mat"),
        {"xs": x.reshape(1, nx), "ys": y.reshape(ny, 1), "U": U, "V": V},
        format="5", do_compression=False)

# v7: long single-precision vectors, shuffled, with a flag
order = np.random.default_rng(11).permutation(nx * ny)
U32 = U.astype(np.float32).astype(np.float64)
V32 = V.astype(np.float32).astype(np.float64)
flag = np.zeros((ny, nx), dtype=np.int16)
flag[2, 4] = 1
col = lambda a, t: a.ravel()[order].astype(t).reshape(-1, 1)
savemat(os.path.join(here, "mat_frame_v7.mat"),
        {"xs": col(X, np.float64), "ys": col(Y, np.float64),
         "U": col(U, np.float32), "V": col(V, np.float32), "bad": col(flag, np.int16)},
        format="5", do_compression=True)

rows = []
for j in range(ny):
    for i in range(nx):
        rows.append([repr(float(X[j, i])), repr(float(Y[j, i])),
                     repr(float(U[j, i])), repr(float(V[j, i])),
                     repr(float(U32[j, i])), repr(float(V32[j, i])), str(int(flag[j, i]))])
with open(os.path.join(here, "mat_frame.csv"), "w") as fh:
    fh.write("xs,ys,U,V,U32,V32,bad\n")
    for r in rows:
        fh.write(",".join("" if c == "nan" else c for c in r) + "\n")

run = os.path.join(here, "mat_run")
os.makedirs(run, exist_ok=True)
for k in (1, 2, 3):
    Uk = np.sin(X + 0.3 * k) * np.cos(Y) / 3.0
    Vk = -np.cos(X + 0.3 * k) * np.sin(Y) / 5.0 + 0.01 * k
    Uk[k, 2 * k - 1] = np.nan
    path = os.path.join(run, f"f{k}.mat")
    if k < 3:
        savemat(path, {"xs": x.reshape(1, nx), "ys": y.reshape(ny, 1), "U": Uk, "V": Vk},
                format="5", do_compression=(k == 2))
    else:
        savemat(path, {"xs": col(X, np.float64), "ys": col(Y, np.float64),
                       "U": col(Uk, np.float64), "V": col(Vk, np.float64)},
                format="5", do_compression=True)
    with open(os.path.join(run, f"f{k}.csv"), "w") as fh:
        fh.write("xs,ys,U,V\n")
        for j in range(ny):
            for i in range(nx):
                u = "" if np.isnan(Uk[j, i]) else repr(float(Uk[j, i]))
                fh.write(f"{float(X[j, i])!r},{float(Y[j, i])!r},{u},{float(Vk[j, i])!r}\n")

with open(os.path.join(here, "mat_frame.json"), "w") as fh:
    json.dump({"library": "scipy", "version": scipy.__version__, "numpy": np.__version__,
               "call": "scipy.io.savemat(path, vars, format='5', do_compression=False | True)",
               "csv_sha256": hashlib.sha256(open(os.path.join(here, "mat_frame.csv"), "rb").read()).hexdigest()},
              fh, indent=1, sort_keys=True)
