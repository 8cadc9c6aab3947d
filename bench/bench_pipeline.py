#!/usr/bin/env python3
"""Writes the benchmark pipeline for a campaign made by `curlew synth`.

Usage: bench_pipeline.py SYNTH_PIPELINE.toml > bench.toml (same folder)
Keeps the campaign's input and runs and asks curlew for exactly the
reduction bench/numpy_reduce.py does: the normalized median test (eps
0.1 px, threshold 2), neighbour-mean filling, least-squares vorticity (no
other quantities, no truncation estimate), ensemble statistics; no
figures, no phase bins.
"""
import sys
import tomllib


def val(v):
    if isinstance(v, str):
        return '"' + v + '"'
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {val(x)}" for k, x in v.items()) + " }"
    return repr(v)


with open(sys.argv[1], "rb") as f:
    p = tomllib.load(f)
out = ['[campaign]', 'name = "bench"', "", "[input]"]
out += [f"{k} = {val(v)}" for k, v in p["input"].items()]
out += [
    "",
    "[validation]",
    'median = { eps_px = 0.1, threshold = 2.0, radius = 1, combine = "either" }',
    "",
    "[fill]",
    'method = "neighbour-mean"',
    "",
    "[derivatives]",
    'scheme = "least-squares"',
    "quantities = []",
    "truncation = false",
    "",
    "[output]",
    "figures = false",
]
for r in p["run"][:1]:
    out += ["", "[[run]]", f'id = "{r["id"]}"', f'frames = "{r["frames"]}"']
    if "input" in r:
        out += ["[run.input]"] + [f"{k} = {val(v)}" for k, v in r["input"].items()]
print("\n".join(out))
