#!/usr/bin/python3
"""Writes the reference values for the quality metrics and the bootstrap.

Run with Debian's packages (python3-sklearn 1.2.1, python3-scipy 1.10.1,
python3-numpy):  /usr/bin/python3 testdata/reference/make_reference.py
from the repository root. Output goes beside this script:

  metrics.json    NDCG@k per query group (scikit-learn ndcg_score for linear
                  gain, the written-out formula below for exponential gain),
                  ROC AUC (roc_auc_score), log loss (log_loss), RMSE
                  (mean_squared_error, squared=False) and mean absolute
                  difference (mean_absolute_error), with and without weights.
  bootstrap.json  numpy.percentile on fixed vectors, and a
                  scipy.stats.bootstrap percentile interval of the mean with
                  its bootstrap distribution.

Every input is an invented, seeded random vector or a hand-made case; no
real data. JSON never holds NaN: a reference that the library refuses to
compute is written as null with the reason beside it.
"""
import json
import math
import os
import sys

import numpy as np
import scipy
import scipy.stats
import sklearn
from sklearn.metrics import (
    log_loss,
    mean_absolute_error,
    mean_squared_error,
    ndcg_score,
    roc_auc_score,
)

HERE = os.path.dirname(os.path.abspath(__file__))
KS = [1, 3, 5, 10, None]


def exponential_ndcg(labels, scores, k):
    """NDCG@k with exponential gain, written out from the definitions.

    DCG@k = sum over positions i = 1..k of gain / log2(i + 1) (Jarvelin and
    Kekalainen 2002, "Cumulated gain-based evaluation of IR techniques"),
    with gain = 2^rel - 1 (Burges et al. 2005, "Learning to rank using
    gradient descent"). Items with equal scores share the mean gain of their
    tie block at each of the block's positions (McSherry and Najork 2008,
    "Computing information retrieval performance measures efficiently in
    the presence of tied scores"). NDCG = DCG / ideal DCG; None when the
    ideal DCG is 0 (no relevant item).
    """
    labels = [float(v) for v in labels]
    scores = [float(v) for v in scores]
    n = len(labels)
    k = n if k is None else min(k, n)
    gains = [2.0 ** r - 1.0 for r in labels]
    order = sorted(range(n), key=lambda i: -scores[i])
    dcg = 0.0
    pos = 0
    while pos < n:
        end = pos
        while end + 1 < n and scores[order[end + 1]] == scores[order[pos]]:
            end += 1
        mean_gain = sum(gains[order[j]] for j in range(pos, end + 1)) / (end - pos + 1)
        for j in range(pos, min(end + 1, k)):
            dcg += mean_gain / math.log2(j + 2)
        pos = end + 1
    ideal = sorted(gains, reverse=True)
    idcg = sum(ideal[j] / math.log2(j + 2) for j in range(k))
    if idcg == 0:
        return None
    return dcg / idcg


def sk_ndcg(labels, scores, k):
    return float(ndcg_score(np.array([labels], dtype=float), np.array([scores], dtype=float), k=k))


def ndcg_groups(rng):
    groups = []

    def add(name, labels, scores, note=""):
        groups.append({"name": name, "labels": [float(v) for v in labels],
                       "scores": [float(v) for v in scores], "note": note})

    add("tie-straddles-k3", [0, 4, 1, 0, 2], [3, 2, 2, 2, 1],
        "a three-way tie covers positions 2-4, so k=3 cuts through it")
    add("all-tied", [3, 0, 1, 0, 2, 0], [0.5] * 6)
    add("perfect", [4, 3, 2, 1, 0, 0], [9, 8, 7, 6, 5, 4])
    add("reversed", [0, 0, 1, 2, 3, 4], [9, 8, 7, 6, 5, 4])
    add("two-items", [1, 0], [-0.25, 0.75])
    add("fractional-labels", [0.5, 2.25, 0, 1.5, 0, 3], [0.1, 0.4, 0.4, -1.2, 2.0, 0.3])
    add("negative-and-zero-scores", [2, 0, 1, 3, 0, 1, 0], [-0.0, 0.0, -3.5, -1e-9, 1e300, -1e300, 0.0],
        "-0 and +0 tie, as they compare equal")
    for g in range(14):
        size = int(rng.integers(2, 31))
        labels = rng.choice([0, 0, 0, 1, 1, 2, 3, 4], size=size)
        if labels.max() == 0:
            labels[0] = 1
        # scores rounded to one decimal so that ties are common
        scores = np.round(rng.normal(size=size), 1)
        add("random-%02d" % g, labels, scores)
    groups_out = []
    for grp in groups:
        cases = []
        for k in KS:
            lin = sk_ndcg(grp["labels"], grp["scores"], k)
            exp = exponential_ndcg(grp["labels"], grp["scores"], k)
            # cross-check: DCG is linear in the gains, so exponential gain is
            # ndcg_score on 2^rel - 1
            exp_sk = sk_ndcg([2.0 ** r - 1 for r in grp["labels"]], grp["scores"], k)
            if not abs(exp - exp_sk) <= 1e-12:
                sys.exit("exponential formula disagrees with ndcg_score on 2^rel-1: %s k=%s" % (grp["name"], k))
            cases.append({"k": 0 if k is None else k, "linear": lin, "exponential": exp})
        grp = dict(grp)
        grp["cases"] = cases
        groups_out.append(grp)
    return groups_out


def ndcg_single_items():
    # ndcg_score refuses one-item input (type_of_target is not multi-output).
    # The reference is the same item padded with one irrelevant item scored
    # below it: the padding adds no gain at any position, and the single
    # item keeps position 1, so NDCG is unchanged.
    out = []
    for rel, score in [(2.0, 0.3), (1.0, -4.0)]:
        ref = sk_ndcg([rel, 0.0], [score, score - 1.0], None)
        out.append({"label": rel, "score": score, "linear": ref,
                    "exponential": exponential_ndcg([rel], [score], None)})
    return out


def ndcg_no_relevant():
    labels = [0, 0, 0, 0]
    scores = [0.3, 0.1, 0.1, -2]
    return {"labels": [float(v) for v in labels], "scores": scores,
            "sklearn": sk_ndcg(labels, scores, None),
            "note": "ndcg_score scores a group with no relevant item as 0"}


def ndcg_batch(rng):
    # ndcg_score averages per-group NDCG with sample_weight when the groups
    # have equal size; one group has no relevant item and counts as 0.
    rows, cols = 6, 7
    labels = rng.choice([0, 0, 1, 2, 3], size=(rows, cols)).astype(float)
    labels[2, :] = 0
    scores = np.round(rng.normal(size=(rows, cols)), 1)
    weights = np.array([1, 3, 2, 0, 1, 4], dtype=float)
    out = {"labels": labels.tolist(), "scores": scores.tolist(), "weights": weights.tolist(), "cases": []}
    for k in KS:
        out["cases"].append({
            "k": 0 if k is None else k,
            "weighted": float(ndcg_score(labels, scores, k=k, sample_weight=weights)),
            "unweighted": float(ndcg_score(labels, scores, k=k)),
        })
    return out


def auc_cases(rng):
    cases = []

    def add(name, scores, labels, weights=None, note=""):
        scores = np.asarray(scores, dtype=float)
        labels = np.asarray(labels, dtype=float)
        try:
            ref = float(roc_auc_score(labels, scores, sample_weight=weights))
        except ValueError as err:
            ref, note = None, "roc_auc_score raises: %s" % err
        cases.append({"name": name, "scores": scores.tolist(), "labels": labels.tolist(),
                      "weights": None if weights is None else np.asarray(weights, dtype=float).tolist(),
                      "auc": ref, "note": note})

    n = 300
    s = np.round(rng.normal(size=n), 1)
    y = (rng.random(n) < 1 / (1 + np.exp(-2 * s))).astype(float)
    add("ties", s, y)
    add("ties-poisson-weights", s, y, rng.poisson(1.0, size=n).astype(float))
    add("ties-real-weights", s, y, rng.uniform(0.1, 3.0, size=n))
    n = 2000
    s = rng.normal(size=n)
    y = (rng.random(n) < 1 / (1 + np.exp(-s))).astype(float)
    add("continuous", s, y)
    add("continuous-weights", s, y, rng.exponential(size=n))
    add("all-tied", [0.2] * 6, [0, 1, 1, 0, 1, 0])
    add("perfect", [0.1, 0.2, 0.3, 0.8, 0.9], [0, 0, 0, 1, 1])
    add("reversed", [0.9, 0.8, 0.3, 0.2, 0.1], [0, 0, 0, 1, 1])
    add("one-class", [0.1, 0.5, 0.7], [1, 1, 1])
    return cases


def logloss_cases(rng):
    n = 200
    p = rng.uniform(size=n)
    # exact 0 and 1 and values past the clip bound on both sides
    p[:8] = [0.0, 1.0, 1e-17, 1 - 1e-17, 1e-300, 0.5, 1e-16, 1 - 1e-16]
    y = (rng.random(n) < p).astype(float)
    y[:8] = [1, 0, 1, 0, 1, 1, 0, 1]
    w = rng.poisson(1.0, size=n).astype(float)
    w[0] = 2.0
    wr = rng.uniform(0.2, 2.0, size=n)
    binary = {
        "labels": y.tolist(), "probs": p.tolist(), "weights": w.tolist(), "real_weights": wr.tolist(),
        "per_row": [float(log_loss([yi], [pi], labels=[0, 1])) for yi, pi in zip(y, p)],
        "mean": float(log_loss(y, p)),
        "weighted": float(log_loss(y, p, sample_weight=w)),
        "real_weighted": float(log_loss(y, p, sample_weight=wr)),
        "eps": float(np.finfo(np.float64).eps),
    }
    classes = 4
    n = 150
    raw = rng.dirichlet(np.ones(classes) * 0.7, size=n)
    raw[0] = [0.0, 1.0, 0.0, 0.0]
    raw[1] = [0.2, 0.2, 0.2, 0.2]  # rows need not sum to 1: log_loss renormalises
    raw[2] = [1e-20, 0.5, 0.25, 0.25]
    yc = np.array([int(rng.choice(classes, p=r / r.sum())) for r in raw], dtype=float)
    yc[0] = 0
    yc[2] = 0
    wc = rng.poisson(1.0, size=n).astype(float)
    wc[0] = 1.0
    multi = {
        "classes": classes, "labels": yc.tolist(), "probs": raw.reshape(-1).tolist(), "weights": wc.tolist(),
        "per_row": [float(log_loss([yi], [r], labels=list(range(classes)))) for yi, r in zip(yc, raw)],
        "mean": float(log_loss(yc, raw, labels=list(range(classes)))),
        "weighted": float(log_loss(yc, raw, sample_weight=wc, labels=list(range(classes)))),
    }
    return {"binary": binary, "multiclass": multi}


def regression_cases(rng):
    n = 250
    y = rng.normal(size=n) * 3
    p = y + rng.normal(size=n)
    w = rng.poisson(1.0, size=n).astype(float)
    return {
        "labels": y.tolist(), "predictions": p.tolist(), "weights": w.tolist(),
        "rmse": float(mean_squared_error(y, p, squared=False)),
        "rmse_weighted": float(mean_squared_error(y, p, sample_weight=w, squared=False)),
        "mean_abs_delta": float(mean_absolute_error(y, p)),
        "mean_abs_delta_weighted": float(mean_absolute_error(y, p, sample_weight=w)),
    }


def percentile_cases(rng):
    vectors = {
        "one": [3.5],
        "two": [1.0, -1.0],
        "ties": [2.0, 2.0, 2.0, 5.0, 5.0, 1.0, 9.0],
        "random-101": rng.normal(size=101).tolist(),
        "random-200": rng.exponential(size=200).tolist(),
        "wide": [1e300, -1e300, 1.0, 2.0, 3.0],
    }
    qs = [0.0, 2.5, 5.0, 10.0, 25.0, 33.3, 50.0, 66.7, 75.0, 90.0, 95.0, 97.5, 99.0, 100.0]
    out = []
    for name, v in vectors.items():
        out.append({"name": name, "values": [float(x) for x in v],
                    "cases": [{"q": q, "percentile": float(np.percentile(np.array(v), q))} for q in qs]})
    return out


def bootstrap_interval(rng):
    n = 200
    x = rng.exponential(size=n) * 2 + 1
    res = scipy.stats.bootstrap((x,), np.mean, confidence_level=0.95, n_resamples=9999,
                                method="percentile", random_state=np.random.default_rng(7))
    return {
        "values": x.tolist(), "confidence": 0.95, "n_resamples": 9999,
        "lo": float(res.confidence_interval.low), "hi": float(res.confidence_interval.high),
        "distribution": res.bootstrap_distribution.tolist(),
    }


def write(name, obj):
    with open(os.path.join(HERE, name), "w") as f:
        json.dump(obj, f, allow_nan=False, indent=None, separators=(",", ":"))
        f.write("\n")


def main():
    rng = np.random.default_rng(20261203)
    versions = {"scikit-learn": sklearn.__version__, "scipy": scipy.__version__, "numpy": np.__version__}
    write("metrics.json", {
        "versions": versions,
        "ndcg": {
            "groups": ndcg_groups(rng),
            "single_items": ndcg_single_items(),
            "no_relevant": ndcg_no_relevant(),
            "batch": ndcg_batch(rng),
        },
        "auc": auc_cases(rng),
        "logloss": logloss_cases(rng),
        "regression": regression_cases(rng),
    })
    write("bootstrap.json", {
        "versions": versions,
        "percentile": percentile_cases(rng),
        "interval": bootstrap_interval(rng),
    })


if __name__ == "__main__":
    main()
