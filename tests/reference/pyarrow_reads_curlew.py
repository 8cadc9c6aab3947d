#!/usr/bin/env python3
"""Reference for io::write_parquet: what pyarrow reads from a file curlew wrote.

curlew_written.parquet (committed beside this script) is the table of the
unit test `write_parquet_types_and_values` (x = 0.25, NaN, -1e-9 as f64;
n = 1, 2, 3 as i64; id = "a", "b", "c" as strings), written by curlew; the
test checks that curlew still writes exactly these bytes. The JSON records
the parquet physical and logical types pyarrow sees and the values it reads
(NaN as null in the JSON).
Writes pyarrow_reads_curlew.json into the folder given as argument (default: here).
"""
import json, math, os, sys
import pyarrow as pa, pyarrow.parquet as pq

here = os.path.dirname(os.path.abspath(__file__))
folder = sys.argv[1] if len(sys.argv) > 1 else here
pf = pq.ParquetFile(os.path.join(here, "curlew_written.parquet"))
s = pf.schema
cols = pf.read().to_pydict()
cols = {k: [None if isinstance(v, float) and math.isnan(v) else v for v in vs] for k, vs in cols.items()}
out = {
    "library": "pyarrow",
    "version": pa.__version__,
    "call": "pyarrow.parquet.ParquetFile('curlew_written.parquet'): schema.column(k).physical_type/logical_type, read().to_pydict()",
    "physical_types": [s.column(k).physical_type for k in range(len(s))],
    "logical_types": [str(s.column(k).logical_type) for k in range(len(s))],
    "names": [s.column(k).name for k in range(len(s))],
    "columns": cols,
}
with open(os.path.join(folder, "pyarrow_reads_curlew.json"), "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
