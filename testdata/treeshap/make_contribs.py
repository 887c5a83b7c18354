#!/usr/bin/python3
"""Writes the TreeSHAP reference values of the benchmark model.

Run from the repository root with Debian's python3-xgboost 1.7.4:
    /usr/bin/python3 testdata/treeshap/make_contribs.py

Reads testdata/bench/model.json.gz (the 300-tree, depth-6 rank:pairwise
model written by testdata/bench/make_bench.py) and explains the first 200
benchmark rows (the splitmix64 generator of make_bench.py, seed 2, the same
rows as the Go package importance/benchdata) with
Booster.predict(pred_contribs=True). Writes bench_contribs.csv beside this
script: one line per row, 30 feature contributions then the bias.
"""
import gzip
import os
import sys

import numpy as np
import xgboost as xgb

HERE = os.path.dirname(os.path.abspath(__file__))
sys.dont_write_bytecode = True  # keep testdata/bench free of __pycache__
sys.path.insert(0, os.path.join(HERE, "..", "bench"))
import make_bench  # noqa: E402  (same row generator as importance/benchdata)

ROWS = 200


def main():
    x, _, _ = make_bench.rows(ROWS, 2)
    bst = xgb.Booster()
    with gzip.open(os.path.join(HERE, "..", "bench", "model.json.gz"), "rb") as f:
        bst.load_model(bytearray(f.read()))
    d = xgb.DMatrix(x, feature_names=make_bench.names())
    contribs = bst.predict(d, pred_contribs=True)
    np.savetxt(os.path.join(HERE, "bench_contribs.csv"), contribs, fmt="%.9g", delimiter=",")
    print("xgboost", xgb.__version__, "rows", contribs.shape[0], "columns", contribs.shape[1])


if __name__ == "__main__":
    main()
