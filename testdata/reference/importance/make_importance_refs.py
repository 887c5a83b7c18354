#!/usr/bin/python3
"""Writes the permutation-importance references for the importance engine.

Run with Debian's packages (python3-xgboost 1.7.4, python3-sklearn 1.2.1,
python3-numpy, python3-pandas):

    /usr/bin/python3 testdata/reference/importance/make_importance_refs.py

from the repository root. It reads the XGBoost fixtures of testdata/models
(made by testdata/models/make_models.py) and writes permutation.json beside
this script:

  binary   sklearn.inspection.permutation_importance on testdata/models/binary
           with a callable scorer: minus the log loss
           (sklearn.metrics.log_loss) of the logistic of XGBoost's raw margin,
           computed in float64.
  ranking  the same on testdata/models/ranking with a callable scorer: mean
           NDCG@10 over the query groups with exponential gain 2^rel - 1,
           groups without a relevant item left out of the mean.

Per feature the file holds the mean and the standard deviation (numpy std,
ddof 0, as permutation_importance reports it) of the importances over
n_repeats shuffles, plus the unshuffled score. The sign convention is
scikit-learn's: importance = baseline score - shuffled score.

The exponential-gain NDCG of one group is sklearn.metrics.ndcg_score with the
gains 2^rel - 1 passed as y_true (ndcg_score's gain is y_true itself, and it
averages the gain over tied scores). ndcg_score refuses one-item groups; such
a group scores 1 when its item is relevant (its only ordering is the ideal
one). The data are the invented rows of the fixtures.
"""
import json
import os

import numpy as np
import pandas as pd
import sklearn
import xgboost as xgb
from sklearn.inspection import permutation_importance
from sklearn.metrics import log_loss, ndcg_score

HERE = os.path.dirname(os.path.abspath(__file__))
MODELS = os.path.join(HERE, "..", "..", "models")
RANDOM_STATE = 20230214
K = 10


class BoosterMargin:
    """Holds an XGBoost booster; the scorers call margin() on the rows."""

    def __init__(self, booster, names):
        self.booster = booster
        self.names = names

    def fit(self, x, y):  # permutation_importance never fits; kept for the estimator protocol
        return self

    def margin(self, x):
        d = xgb.DMatrix(np.asarray(x, dtype=np.float64), missing=np.nan, feature_names=self.names)
        return self.booster.predict(d, output_margin=True).astype(np.float64)


def load(name):
    folder = os.path.join(MODELS, name)
    bst = xgb.Booster()
    bst.load_model(os.path.join(folder, "model.json"))
    with open(os.path.join(folder, "features.txt")) as f:
        names = [ln.strip() for ln in f if ln.strip()]
    rows = pd.read_csv(os.path.join(folder, "rows.csv"))
    x = rows[names].to_numpy(dtype=np.float64)
    return BoosterMargin(bst, names), names, x, rows


def neg_log_loss(est, x, y):
    p = 1.0 / (1.0 + np.exp(-est.margin(x)))
    return -log_loss(y, p, labels=[0, 1])


def make_mean_ndcg(groups):
    order = {}
    for i, g in enumerate(groups):
        order.setdefault(int(g), []).append(i)
    index = [np.array(v) for v in order.values()]

    def mean_ndcg(est, x, y):
        m = est.margin(x)
        vals = []
        for idx in index:
            gains = 2.0 ** np.asarray(y)[idx] - 1.0
            if not np.any(gains > 0):
                continue  # no relevant item: left out of the mean
            if len(idx) == 1:
                vals.append(1.0)
                continue
            vals.append(ndcg_score([gains], [m[idx]], k=K))
        return float(np.mean(vals))

    return mean_ndcg


def run(est, names, x, y, scorer, n_repeats, description):
    res = permutation_importance(est, x, y, scoring=scorer, n_repeats=n_repeats, random_state=RANDOM_STATE)
    return {
        "scoring": description,
        "n_repeats": n_repeats,
        "random_state": RANDOM_STATE,
        "rows": int(x.shape[0]),
        "baseline_score": float(scorer(est, x, y)),
        "features": {
            nm: {"mean": float(res.importances_mean[j]), "std": float(res.importances_std[j])}
            for j, nm in enumerate(names)
        },
    }


def main():
    out = {
        "source": "scikit-learn %s permutation_importance, XGBoost %s Booster.predict(output_margin=True)"
        % (sklearn.__version__, xgb.__version__),
        "sign": "importance = baseline score - shuffled score",
    }
    est, names, x, rows = load("binary")
    y = rows["label"].to_numpy(dtype=np.float64)
    out["binary"] = run(est, names, x, y, neg_log_loss, 300, "minus log loss of 1/(1+exp(-margin)), sklearn.metrics.log_loss")

    est, names, x, rows = load("ranking")
    y = rows["label"].to_numpy(dtype=np.float64)
    scorer = make_mean_ndcg(rows["query"].to_numpy())
    out["ranking"] = run(est, names, x, y, scorer, 200,
                         "mean NDCG@10 over query groups, gain 2^rel-1 (ndcg_score on the gains), groups without a relevant item left out")

    with open(os.path.join(HERE, "permutation.json"), "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
