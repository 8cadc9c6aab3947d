#!/usr/bin/env python3
"""Reference for io::parquet: a long table written by pyarrow.

Two frames (ids 2 and 1) of a 4 x 3 grid, rows shuffled within frames and
the frames interleaved in two blocks, written by pyarrow.parquet once with
a single row group (pyarrow_long_table.parquet) and once in row groups of
5 rows (pyarrow_long_table_rg5.parquet). Both parquet files are committed
beside this script; the JSON records what pyarrow reads back from them.
Writes the two files and pyarrow_long_table.json into the folder given as
argument (default: here).
"""
import json, os, sys
import pyarrow as pa, pyarrow.parquet as pq

folder = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
rows = [(f, x, y, f * 100 + x + 10 * y) for f in (2, 1) for y in range(3) for x in range(4)]
rows = rows[12:18] + rows[:12] + rows[18:]
t = pa.table({
    "id": [r[0] for r in rows],
    "X": [float(r[1]) for r in rows],
    "Y": [float(r[2]) for r in rows],
    "U": [float(r[3]) for r in rows],
    "V": [-float(r[3]) for r in rows],
})
files = {}
for name, kw in [("pyarrow_long_table.parquet", {}), ("pyarrow_long_table_rg5.parquet", {"row_group_size": 5})]:
    path = os.path.join(folder, name)
    pq.write_table(t, path, **kw)
    back = pq.ParquetFile(path)
    files[name] = {"row_groups": back.num_row_groups, "columns": back.read().to_pydict()}
out = {
    "library": "pyarrow",
    "version": pa.__version__,
    "call": "pyarrow.parquet.write_table(t, path[, row_group_size=5]); ParquetFile(path).read().to_pydict()",
    "files": files,
}
with open(os.path.join(folder, "pyarrow_long_table.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
