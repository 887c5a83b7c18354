#!/usr/bin/python3
"""Trains the benchmark model and times the reference implementations.

Run from the repository root with Debian's packages (python3-xgboost 1.7.4,
python3-sklearn 1.2.1):  /usr/bin/python3 testdata/bench/make_bench.py [--time]
(--time-only times the committed model without retraining it).

Writes testdata/bench/model.json.gz: a 300-tree, depth-6 rank:pairwise model
over 30 invented features, trained on rows from the same splitmix64
generator as the Go package importance/benchdata (seed 1). The benchmark rows
are seed 2. With --time it also measures, on those rows with 2 threads:
  - XGBoost predict(output_margin=True) on 100k rows,
  - XGBoost predict(pred_contribs=True) on 10k rows,
  - sklearn.inspection.permutation_importance with n_repeats=5 and an
    NDCG@10 scorer averaged over the query groups, on 100k rows,
and writes the seconds to testdata/bench/reference_timings.json. These
figures are for the closing notes and README; go test never reads them.
"""
import gzip
import json
import os
import sys
import time

import numpy as np
import xgboost as xgb

HERE = os.path.dirname(os.path.abspath(__file__))
F = 30
GROUP = 25
M64 = (1 << 64) - 1


def rows(n, seed):
    """Same generator as importance/benchdata.Rows (integer splitmix64)."""
    s = seed
    out = np.empty((n, F))
    label = np.empty(n)

    def nxt():
        nonlocal s
        s = (s + 0x9E3779B97F4A7C15) & M64
        z = s
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
        return z ^ (z >> 31)

    def uni():
        return (nxt() >> 11) * (1.0 / (1 << 53))

    for r in range(n):
        for j in range(F):
            u = uni()
            if j % 3 == 0:
                x = u * 10
            elif j % 3 == 1:
                x = float(np.floor(u * 20))
            else:
                x = 5 * u * u
            if uni() < 0.02:
                x = np.nan
            out[r, j] = x
        v = np.nan_to_num(out[r], nan=0.0)
        sig = 0.3 * v[0] - 0.1 * v[1] + 0.4 * v[2] + 0.05 * v[3] * v[4] / 10 + 0.2 * v[5]
        for j in range(6, F):
            sig += 0.01 * v[j] * (j % 5) / 5
        sig -= 2
        sc = sig + 2 * (uni() - 0.5)
        label[r] = max(0.0, min(3.0, float(np.floor(sc))))
    group = np.arange(n) // GROUP
    return out, group, label


def names():
    return ["f%02d" % j for j in range(F)]


def train():
    x, g, y = rows(100000, 1)
    d = xgb.DMatrix(x, label=y, feature_names=names())
    d.set_group(np.bincount(g))
    bst = xgb.train({"objective": "rank:pairwise", "max_depth": 6, "eta": 0.1, "seed": 7, "nthread": 2}, d, num_boost_round=300)
    raw = bst.save_raw(raw_format="json")
    with gzip.open(os.path.join(HERE, "model.json.gz"), "wb") as f:
        f.write(bytes(raw))
    return bst


def ndcg_at_10(scores, labels, groups):
    from sklearn.metrics import ndcg_score
    vals = []
    for q in np.unique(groups):
        m = groups == q
        if m.sum() < 2 or labels[m].max() <= 0:
            continue
        vals.append(ndcg_score([labels[m]], [scores[m]], k=10))
    return float(np.mean(vals))


def timings(bst):
    from sklearn.inspection import permutation_importance
    x, g, y = rows(100000, 2)
    out = {"xgboost": xgb.__version__}
    bst.set_param({"nthread": 2})
    d = xgb.DMatrix(x, feature_names=names())
    t = time.perf_counter(); bst.predict(d, output_margin=True); out["score_100k_s"] = time.perf_counter() - t
    d10 = xgb.DMatrix(x[:10000], feature_names=names())
    t = time.perf_counter(); bst.predict(d10, pred_contribs=True); out["pred_contribs_10k_s"] = time.perf_counter() - t

    class Wrapped:
        def fit(self, *a):
            return self

        def predict(self, xx):
            return bst.predict(xgb.DMatrix(xx, feature_names=names()), output_margin=True)

    def scorer(est, xx, yy):
        return ndcg_at_10(est.predict(xx), yy, g)

    t = time.perf_counter()
    permutation_importance(Wrapped(), x, y, scoring=scorer, n_repeats=5, n_jobs=1, random_state=0)
    out["sklearn_permutation_importance_100k_s"] = time.perf_counter() - t
    out["note"] = "2 threads for XGBoost; permutation_importance n_jobs=1 (the XGBoost predictor inside uses both cores)"
    with open(os.path.join(HERE, "reference_timings.json"), "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
    print(out)


def load():
    bst = xgb.Booster()
    with gzip.open(os.path.join(HERE, "model.json.gz"), "rb") as f:
        bst.load_model(bytearray(f.read()))
    return bst


if __name__ == "__main__":
    if "--time-only" in sys.argv:
        timings(load())
    else:
        b = train()
        if "--time" in sys.argv:
            timings(b)
