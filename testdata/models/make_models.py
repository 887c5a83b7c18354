#!/usr/bin/python3
"""Writes the XGBoost reference fixtures used by the Go tests.

Run with Debian's packages (python3-xgboost 1.7.4, python3-sklearn 1.2.1,
python3-pandas):  /usr/bin/python3 testdata/models/make_models.py
from the repository root. Output goes beside this script, one folder per
model. The data are invented (seeded random numbers), not a real data set.

Each folder holds:
  model.json      Booster.save_model
  dump.json       Booster.get_dump(dump_format="json", with_stats=True) as a JSON list
  dump.txt        Booster.get_dump(with_stats=True), "booster[i]:" blocks
  features.txt    feature names, one per line
  rows.csv        the input rows (header = feature names, empty = missing),
                  plus label and group columns where the task has them
  margins.csv     predict(output_margin=True), one row per input row
  preds.csv       predict() (after the link)
  contribs.csv    predict(pred_contribs=True): per feature, then bias (last)
  score.json      get_score for weight, gain, total_gain, cover, total_cover
  meta.json       objective, base_score, classes, xgboost version
"""
import json
import os
import sys

import numpy as np
import pandas as pd
import xgboost as xgb

HERE = os.path.dirname(os.path.abspath(__file__))


def invented_data(rng, n, d, missing=0.0):
    x = rng.normal(size=(n, d))
    # a few heavy-tailed and integer-valued columns, so thresholds sit on values
    x[:, 1] = np.round(x[:, 1] * 3)
    x[:, 2] = rng.exponential(size=n)
    if missing > 0:
        mask = rng.random(size=(n, d)) < missing
        x[mask] = np.nan
    return x


def signal(x):
    z = np.nan_to_num(x, nan=0.0)
    return 1.5 * z[:, 0] - 0.8 * z[:, 1] + np.sin(2 * z[:, 2]) + 0.5 * z[:, 3] * z[:, 4]


def write_rows(path, x, names, extra):
    cols = {}
    for j, nm in enumerate(names):
        cols[nm] = x[:, j]
    for k, v in extra.items():
        cols[k] = v
    pd.DataFrame(cols).to_csv(path, index=False, na_rep="", float_format="%.17g")


def save(name, bst, dtest, x, names, extra, meta):
    out = os.path.join(HERE, name)
    os.makedirs(out, exist_ok=True)
    bst.save_model(os.path.join(out, "model.json"))
    with open(os.path.join(out, "dump.json"), "w") as f:
        f.write("[\n" + ",\n".join(bst.get_dump(dump_format="json", with_stats=True)) + "\n]\n")
    with open(os.path.join(out, "dump.txt"), "w") as f:
        for i, t in enumerate(bst.get_dump(with_stats=True)):
            f.write("booster[%d]:\n%s" % (i, t))
    with open(os.path.join(out, "features.txt"), "w") as f:
        f.write("\n".join(names) + "\n")
    write_rows(os.path.join(out, "rows.csv"), x, names, extra)
    np.savetxt(os.path.join(out, "margins.csv"), np.atleast_2d(bst.predict(dtest, output_margin=True).T).T, fmt="%.9g", delimiter=",")
    np.savetxt(os.path.join(out, "preds.csv"), np.atleast_2d(bst.predict(dtest).T).T, fmt="%.9g", delimiter=",")
    contribs = bst.predict(dtest, pred_contribs=True)
    if contribs.ndim == 3:  # (rows, classes, features+1)
        contribs = contribs.reshape(contribs.shape[0], -1)
    np.savetxt(os.path.join(out, "contribs.csv"), contribs, fmt="%.9g", delimiter=",")
    score = {t: bst.get_score(importance_type=t) for t in ["weight", "gain", "total_gain", "cover", "total_cover"]}
    with open(os.path.join(out, "score.json"), "w") as f:
        json.dump(score, f, indent=1, sort_keys=True)
    meta = dict(meta)
    meta["xgboost_version"] = xgb.__version__
    meta["rows"] = int(x.shape[0])
    with open(os.path.join(out, "meta.json"), "w") as f:
        json.dump(meta, f, indent=1, sort_keys=True)


def main():
    rng = np.random.default_rng(20261202)
    d = 8
    names = ["alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta"]
    n_train, n_test = 3000, 300

    # binary:logistic, some missing values
    x = invented_data(rng, n_train + n_test, d, missing=0.05)
    p = 1 / (1 + np.exp(-signal(x)))
    y = (rng.random(len(p)) < p).astype(float)
    dtr = xgb.DMatrix(x[:n_train], label=y[:n_train], feature_names=names)
    dte = xgb.DMatrix(x[n_train:], label=y[n_train:], feature_names=names)
    params = {"objective": "binary:logistic", "max_depth": 4, "eta": 0.3, "seed": 1}
    bst = xgb.train(params, dtr, num_boost_round=20)
    save("binary", bst, dte, x[n_train:], names, {"label": y[n_train:]}, {"objective": "binary:logistic"})

    # binary with heavy missingness: default directions matter
    x = invented_data(rng, n_train + n_test, d, missing=0.4)
    p = 1 / (1 + np.exp(-signal(x)))
    y = (rng.random(len(p)) < p).astype(float)
    dtr = xgb.DMatrix(x[:n_train], label=y[:n_train], feature_names=names)
    dte = xgb.DMatrix(x[n_train:], label=y[n_train:], feature_names=names)
    bst = xgb.train({"objective": "binary:logistic", "max_depth": 5, "eta": 0.2, "seed": 2, "base_score": 0.3}, dtr, num_boost_round=15)
    save("missing", bst, dte, x[n_train:], names, {"label": y[n_train:]}, {"objective": "binary:logistic", "base_score": 0.3})

    # reg:squarederror
    x = invented_data(rng, n_train + n_test, d)
    y = signal(x) + rng.normal(scale=0.3, size=len(x))
    dtr = xgb.DMatrix(x[:n_train], label=y[:n_train], feature_names=names)
    dte = xgb.DMatrix(x[n_train:], label=y[n_train:], feature_names=names)
    bst = xgb.train({"objective": "reg:squarederror", "max_depth": 5, "eta": 0.2, "seed": 3}, dtr, num_boost_round=25)
    save("regression", bst, dte, x[n_train:], names, {"label": y[n_train:]}, {"objective": "reg:squarederror"})

    # rank:pairwise, query groups of 5 to 20 items, graded relevance 0..3
    sizes = []
    total = 0
    while total < n_train + n_test:
        s = int(rng.integers(5, 21))
        sizes.append(s)
        total += s
    x = invented_data(rng, total, d, missing=0.02)
    s = signal(x)
    rel = np.clip(np.floor(s - np.quantile(s, 0.5) + rng.normal(scale=0.5, size=total)), 0, 3)
    gid = np.repeat(np.arange(len(sizes)), sizes)
    split_group = np.searchsorted(np.cumsum(sizes), n_train)
    cut = int(np.sum(sizes[: split_group + 1]))
    dtr = xgb.DMatrix(x[:cut], label=rel[:cut], feature_names=names)
    dtr.set_group(sizes[: split_group + 1])
    dte = xgb.DMatrix(x[cut:], label=rel[cut:], feature_names=names)
    dte.set_group(sizes[split_group + 1:])
    bst = xgb.train({"objective": "rank:pairwise", "max_depth": 4, "eta": 0.3, "seed": 4}, dtr, num_boost_round=20)
    save("ranking", bst, dte, x[cut:], names, {"label": rel[cut:], "query": gid[cut:]}, {"objective": "rank:pairwise"})

    # multi:softprob, 3 classes
    x = invented_data(rng, n_train + n_test, d, missing=0.03)
    s = signal(x)
    y = np.digitize(s + rng.normal(scale=0.5, size=len(s)), np.quantile(s, [0.33, 0.66])).astype(float)
    dtr = xgb.DMatrix(x[:n_train], label=y[:n_train], feature_names=names)
    dte = xgb.DMatrix(x[n_train:], label=y[n_train:], feature_names=names)
    bst = xgb.train({"objective": "multi:softprob", "num_class": 3, "max_depth": 3, "eta": 0.3, "seed": 5}, dtr, num_boost_round=10)
    save("multiclass", bst, dte, x[n_train:], names, {"label": y[n_train:]}, {"objective": "multi:softprob", "num_class": 3})

    # categorical feature (hist, enable_categorical): "theta" is a category code 0..5
    x = invented_data(rng, n_train + n_test, d, missing=0.02)
    cat = rng.integers(0, 6, size=len(x))
    effect = np.array([1.0, -1.0, 0.5, 0.0, 2.0, -0.5])
    p = 1 / (1 + np.exp(-(signal(x) + effect[cat])))
    y = (rng.random(len(p)) < p).astype(float)
    df = pd.DataFrame(x[:, :7], columns=names[:7])
    df["theta"] = pd.Categorical(cat, categories=list(range(6)))
    dtr = xgb.DMatrix(df.iloc[:n_train], label=y[:n_train], enable_categorical=True)
    dte = xgb.DMatrix(df.iloc[n_train:], label=y[n_train:], enable_categorical=True)
    bst = xgb.train({"objective": "binary:logistic", "max_depth": 4, "eta": 0.3, "seed": 6, "tree_method": "hist", "max_cat_to_onehot": 1}, dtr, num_boost_round=15)
    xo = x.copy()
    xo[:, 7] = cat
    save("categorical", bst, dte, xo[n_train:], names, {"label": y[n_train:]}, {"objective": "binary:logistic", "categorical": ["theta"]})


if __name__ == "__main__":
    sys.exit(main())
