#!/usr/bin/python3
"""Writes the extra XGBoost reference fixtures of storage/treefile's tests.

Run with Debian's packages (python3-xgboost 1.7.4, python3-pandas) from the
repository root:  /usr/bin/python3 testdata/treefile/make_fixtures.py
It reads testdata/models/categorical/model.json (made by
testdata/models/make_models.py) and writes beside this script:

  dart/                a dart booster (binary:logistic): model.json, rows.csv,
                       margins.csv, preds.csv, meta.json
  poisson/             count:poisson trained without feature names and with
                       base_score 2: model.json, dump.txt, dump.json,
                       rows.csv (header f0..f7), margins.csv, preds.csv,
                       meta.json
  categorical_edge/    rows whose category code is unseen, negative, missing
                       or fractional, scored by the categorical fixture:
                       rows.csv, margins.csv

All data are invented (seeded random numbers).
"""
import json
import os
import sys

import numpy as np
import pandas as pd
import xgboost as xgb

HERE = os.path.dirname(os.path.abspath(__file__))
MODELS = os.path.join(HERE, "..", "models")


def invented_data(rng, n, d, missing=0.0):
    x = rng.normal(size=(n, d))
    x[:, 1] = np.round(x[:, 1] * 3)
    x[:, 2] = rng.exponential(size=n)
    if missing > 0:
        x[rng.random(size=(n, d)) < missing] = np.nan
    return x


def signal(x):
    z = np.nan_to_num(x, nan=0.0)
    return 1.5 * z[:, 0] - 0.8 * z[:, 1] + np.sin(2 * z[:, 2]) + 0.5 * z[:, 3] * z[:, 4]


def write_rows(path, x, names):
    pd.DataFrame({nm: x[:, j] for j, nm in enumerate(names)}).to_csv(path, index=False, na_rep="", float_format="%.17g")


def write_preds(out, bst, d):
    np.savetxt(os.path.join(out, "margins.csv"), np.atleast_2d(bst.predict(d, output_margin=True).T).T, fmt="%.9g", delimiter=",")
    np.savetxt(os.path.join(out, "preds.csv"), np.atleast_2d(bst.predict(d).T).T, fmt="%.9g", delimiter=",")


def write_meta(out, meta):
    meta = dict(meta)
    meta["xgboost_version"] = xgb.__version__
    with open(os.path.join(out, "meta.json"), "w") as f:
        json.dump(meta, f, indent=1, sort_keys=True)


def main():
    rng = np.random.default_rng(20261203)
    d = 8
    names = ["alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta"]

    # dart: leaves scaled by weight_drop at prediction time
    x = invented_data(rng, 1100, d, missing=0.05)
    y = (rng.random(len(x)) < 1 / (1 + np.exp(-signal(x)))).astype(float)
    dtr = xgb.DMatrix(x[:1000], label=y[:1000], feature_names=names)
    dte = xgb.DMatrix(x[1000:], feature_names=names)
    params = {"booster": "dart", "objective": "binary:logistic", "max_depth": 3, "eta": 0.3,
              "rate_drop": 0.3, "skip_drop": 0.0, "seed": 7}
    bst = xgb.train(params, dtr, num_boost_round=8)
    out = os.path.join(HERE, "dart")
    os.makedirs(out, exist_ok=True)
    bst.save_model(os.path.join(out, "model.json"))
    write_rows(os.path.join(out, "rows.csv"), x[1000:], names)
    write_preds(out, bst, dte)
    write_meta(out, {"objective": "binary:logistic", "booster": "dart"})

    # count:poisson without feature names, base_score 2 (log link)
    x = invented_data(rng, 1100, d, missing=0.05)
    y = rng.poisson(np.exp(signal(x) / 3)).astype(float)
    dtr = xgb.DMatrix(x[:1000], label=y[:1000])
    dte = xgb.DMatrix(x[1000:])
    bst = xgb.train({"objective": "count:poisson", "max_depth": 3, "eta": 0.3, "seed": 8, "base_score": 2.0}, dtr, num_boost_round=10)
    out = os.path.join(HERE, "poisson")
    os.makedirs(out, exist_ok=True)
    bst.save_model(os.path.join(out, "model.json"))
    with open(os.path.join(out, "dump.json"), "w") as f:
        f.write("[\n" + ",\n".join(bst.get_dump(dump_format="json", with_stats=True)) + "\n]\n")
    with open(os.path.join(out, "dump.txt"), "w") as f:
        for i, t in enumerate(bst.get_dump(with_stats=True)):
            f.write("booster[%d]:\n%s" % (i, t))
    write_rows(os.path.join(out, "rows.csv"), x[1000:], ["f%d" % j for j in range(d)])
    write_preds(out, bst, dte)
    write_meta(out, {"objective": "count:poisson", "base_score": 2.0})

    # categorical edge cases, scored by the categorical reference model
    bst = xgb.Booster()
    bst.load_model(os.path.join(MODELS, "categorical", "model.json"))
    codes = [0, 1, 2, 3, 4, 5, 6, 7, 31, 32, 100, -1, -0.5, 2.5, 4.9, 0.2, np.nan]
    base = invented_data(rng, len(codes) * 3, d)
    base[:, 7] = np.tile(codes, 3)
    types = ["q"] * 7 + ["c"]
    dte = xgb.DMatrix(base, feature_names=names, feature_types=types, enable_categorical=True)
    out = os.path.join(HERE, "categorical_edge")
    os.makedirs(out, exist_ok=True)
    write_rows(os.path.join(out, "rows.csv"), base, names)
    np.savetxt(os.path.join(out, "margins.csv"), bst.predict(dte, output_margin=True), fmt="%.9g", delimiter=",")


if __name__ == "__main__":
    sys.exit(main())
