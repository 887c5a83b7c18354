#!/usr/bin/python3
"""Builds one planted scenario of the invented holiday-rental world.

Run from the repository root with Debian's packages (python3-xgboost 1.7.4,
python3-numpy; python3-sklearn 1.2.1 only for --check):

    /usr/bin/python3 testdata/planted/make_planted.py --seed 1 --out testdata/planted/seed1

make_all.sh runs it for every committed seed and converts the traffic CSV
files to Parquet. The data are invented: seeded random numbers shaped to look
like a rental search log, no real site, person or data set.

The world. A traveller searches; the site shows 20 to 30 rental listings (one
query group = one search, `search_id`). The traveller's hidden utility for a
listing is a fixed linear function of a few transforms of its features plus
Gumbel noise; the outcome `booked` is graded:
    2 = booked (the best listing by noisy utility, in searches that end in a
        booking), 1 = clicked (the next three listings by noisy utility, and the
        best one when the search ends without a booking), 0 = not clicked.

Two weeks: a baseline world and a candidate world. Each week yields a training
set (not written) and a traffic sample (written). Planted differences:
  pipeline_fault    host_response_hours arrives missing for MISSING_SHARE of
                    the candidate week's rows (training data and traffic) while
                    the true utility still depends on it;
  surge             distance_to_searched_place_km counts SURGE_FACTOR times as much in
                    the candidate world; its distribution does not change;
  went_constant     photo_count reads 0 on every candidate traffic row (a
                    broken join in serving); training data are intact;
  no_signal_costly  image_quality_score and traveller_host_affinity take no
                    part in the utility in either week and are costly;
  stable            every other feature: same distribution and effect.

Outputs in --out:
  baseline.json.gz, candidate.json.gz   XGBoost save_model JSON, gzipped
      (rank:pairwise), trained on the baseline / candidate week;
  traffic_baseline.csv, traffic_candidate.csv   search_id, the features, booked;
      an empty cell is a missing value; rows of one search are contiguous;
  costs.csv     feature,cost_per_1k_rows,unit,group (one used feature left out);
  truth.json    the planted roles and the parameters that made them.

With --check it also prints the permutation importance (scikit-learn
permutation_importance, NDCG@10 averaged over searches) of both models on both
traffic samples, with shares and the ratios the scenario promises.
"""
import argparse
import gzip
import json
import os
import sys

import numpy as np
import xgboost as xgb

FEATURES = [
    "text_match",
    "nightly_price_vs_area_median",
    "review_score",
    "review_count",
    "host_response_hours",
    "photo_count",
    "distance_to_searched_place_km",
    "cancellation_strictness",
    "listing_age_days",
    "instant_book",
    "amenity_match",
    "host_badge",
    "photo_room_coverage",
    "image_quality_score",
    "traveller_host_affinity",
]

PIPELINE_FAULT = "host_response_hours"
SURGE = "distance_to_searched_place_km"
WENT_CONSTANT = "photo_count"
WENT_CONSTANT_VALUE = 0.0
NO_SIGNAL_COSTLY = ["image_quality_score", "traveller_host_affinity"]
UNPRICED = "listing_age_days"

MISSING_SHARE = 0.88  # share of candidate-week rows whose host_response_hours is lost
SURGE_FACTOR = 3.0    # distance weight, candidate over baseline
NOISE_SCALE = 0.3     # Gumbel scale of the traveller's noisy utility
BOOKING_RATE = 0.6    # share of searches that end in a booking
CLICKS = 3            # clicked listings besides the best one

# Weight of each utility term; the transform is in utility(). Features absent
# here (the two costly ones) carry no signal.
WEIGHTS = {
    "text_match": 2.0,
    "nightly_price_vs_area_median": 1.6,
    "review_score": 0.9,
    "review_count": 0.5,
    "host_response_hours": 0.45,
    "photo_count": 0.65,
    "distance_to_searched_place_km": 0.22,
    "cancellation_strictness": 0.45,
    "listing_age_days": 1.1,
    "instant_book": 0.8,
    "amenity_match": 2.0,
    "host_badge": 0.9,
    "photo_room_coverage": 2.0,
}

# Cost catalog: feature, cpu_ms per 1000 rows, group computed together.
# image_quality_score shares the vision group with photo_room_coverage, which
# carries signal, so the group cannot be pruned; traveller_host_affinity is
# alone in its group. listing_age_days is left out on purpose (unpriced).
COSTS = [
    ("text_match", 3.0, "text_relevance"),
    ("nightly_price_vs_area_median", 0.8, "price_index"),
    ("review_score", 0.2, "reviews"),
    ("review_count", 0.2, "reviews"),
    ("host_response_hours", 0.4, "host_profile"),
    ("host_badge", 0.1, "host_profile"),
    ("photo_count", 0.1, "listing_store"),
    ("distance_to_searched_place_km", 1.2, "geo"),
    ("cancellation_strictness", 0.1, "listing_store"),
    ("instant_book", 0.1, "listing_store"),
    ("amenity_match", 1.5, "text_relevance"),
    ("photo_room_coverage", 15.0, "vision"),
    ("image_quality_score", 40.0, "vision"),
    ("traveller_host_affinity", 25.0, "affinity_lookup"),
]

PARAMS = {
    "objective": "rank:pairwise",
    "eta": 0.1,
    "max_depth": 5,
    "min_child_weight": 5,
    "gamma": 6.0,
    "tree_method": "hist",
    "nthread": 2,
}


def listings(rng, n):
    """Feature columns of n listings as a dict name -> float array (NaN = missing)."""
    x = {}
    age = np.floor(rng.exponential(700.0, n)).clip(0, 4000)
    x["listing_age_days"] = age
    mean_reviews = 6.0 + 0.01 * age
    count = rng.poisson(rng.gamma(0.8, mean_reviews / 0.8))
    x["review_count"] = count.astype(float)
    score = np.round((5.0 - rng.gamma(1.3, 0.3, n)).clip(2.5, 5.0), 2)
    score[count == 0] = np.nan  # new listings have no score yet
    x["review_score"] = score
    hours = np.round(np.exp(rng.normal(np.log(2.0), 1.0, n)).clip(0.1, 96.0), 1)
    hours[rng.random(n) < 0.03] = np.nan  # hosts with no messages yet
    x["host_response_hours"] = hours
    photos = (1 + rng.poisson(rng.gamma(4.0, 5.0, n))).clip(1, 80).astype(float)
    x["photo_count"] = photos
    x["distance_to_searched_place_km"] = np.round(np.exp(rng.normal(np.log(3.0), 0.8, n)).clip(0.05, 60.0), 2)
    x["nightly_price_vs_area_median"] = np.round(np.exp(rng.normal(0.0, 0.35, n)), 3)
    x["cancellation_strictness"] = rng.choice(4, size=n, p=[0.25, 0.35, 0.25, 0.15]).astype(float)
    x["instant_book"] = (rng.random(n) < 0.45).astype(float)
    x["amenity_match"] = np.round(rng.beta(3.0, 2.0, n), 2)
    good = np.nan_to_num(score, nan=4.0) >= 4.8
    x["host_badge"] = (rng.random(n) < np.where(good, 0.45, 0.12)).astype(float)
    x["text_match"] = np.round(rng.beta(2.0, 3.0, n), 3)
    x["photo_room_coverage"] = np.round(rng.beta(4.0, 2.0, n), 2)
    iq = np.round(rng.beta(5.0, 2.0, n), 3)
    iq[rng.random(n) < 0.02] = np.nan  # vision model timed out
    x["image_quality_score"] = iq
    x["traveller_host_affinity"] = np.round(rng.normal(0.0, 0.3, n).clip(-1, 1), 3)
    return x


def utility(x, surge):
    """The traveller's mean utility of each listing (true, complete features)."""
    w = dict(WEIGHTS)
    w[SURGE] *= surge
    score = x["review_score"]
    terms = {
        "text_match": x["text_match"],
        "nightly_price_vs_area_median": -np.log(x["nightly_price_vs_area_median"]),
        "review_score": np.where(np.isnan(score), -0.3, score - 4.5),
        "review_count": np.log1p(x["review_count"]),
        "host_response_hours": -np.log(np.nan_to_num(x["host_response_hours"], nan=24.0)),
        "photo_count": np.log(x["photo_count"]),
        "distance_to_searched_place_km": -np.log(x["distance_to_searched_place_km"]),
        "cancellation_strictness": -x["cancellation_strictness"],
        "listing_age_days": -np.log1p(x["listing_age_days"] / 365.0),
        "instant_book": x["instant_book"],
        "amenity_match": x["amenity_match"],
        "host_badge": x["host_badge"],
        "photo_room_coverage": x["photo_room_coverage"],
    }
    u = np.zeros(len(score))
    for name, t in terms.items():
        u += w[name] * t
    return u


def week(rng, searches, surge, first_search_id):
    """One week: (feature dict, search sizes, search ids per row, graded labels)."""
    sizes = rng.integers(20, 31, size=searches)
    n = int(sizes.sum())
    x = listings(rng, n)
    u = utility(x, surge) + rng.gumbel(0.0, NOISE_SCALE, n)
    label = np.zeros(n)
    sid = np.repeat(np.arange(first_search_id, first_search_id + searches), sizes)
    start = 0
    for size in sizes:
        order = start + np.argsort(-u[start:start + size], kind="stable")
        top = order[:CLICKS + 1]
        label[top] = 1
        if rng.random() < BOOKING_RATE:
            label[top[0]] = 2
        start += size
    return x, sizes, sid, label


def lose_values(rng, x, name, share):
    """Copy of x with the named column set missing on a random share of rows."""
    y = dict(x)
    col = x[name].copy()
    col[rng.random(len(col)) < share] = np.nan
    y[name] = col
    return y


def matrix(x):
    return np.column_stack([x[f] for f in FEATURES])


def train(x, sizes, label, seed, rounds):
    d = xgb.DMatrix(matrix(x), label=label, missing=np.nan, feature_names=FEATURES)
    d.set_group(sizes)
    params = dict(PARAMS)
    params["seed"] = seed
    return xgb.train(params, d, num_boost_round=rounds)


def write_model(path, bst):
    raw = bytes(bst.save_raw(raw_format="json"))
    with open(path, "wb") as f:
        # mtime=0 and no file name keep the gzip bytes reproducible.
        with gzip.GzipFile(filename="", mode="wb", fileobj=f, mtime=0, compresslevel=9) as z:
            z.write(raw)


def fmt(v):
    if np.isnan(v):
        return ""
    if v == np.floor(v) and abs(v) < 1e15:
        return "%d" % v
    return repr(float(v))


def write_traffic(path, x, sid, label):
    with open(path, "w", newline="") as f:
        f.write(",".join(["search_id"] + FEATURES + ["booked"]) + "\n")
        cols = [x[name] for name in FEATURES]
        for i in range(len(sid)):
            f.write(",".join(["%d" % sid[i]] + [fmt(c[i]) for c in cols] + ["%d" % label[i]]) + "\n")


def write_costs(path):
    with open(path, "w", newline="") as f:
        f.write("feature,cost_per_1k_rows,unit,group\n")
        for name, cost, group in COSTS:
            f.write("%s,%g,cpu_ms,%s\n" % (name, cost, group))


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, required=True)
    ap.add_argument("--out", required=True)
    ap.add_argument("--train-searches", type=int, default=5000, help="searches per training week")
    ap.add_argument("--traffic-searches", type=int, default=240, help="searches per traffic sample")
    ap.add_argument("--rounds", type=int, default=100, help="boosting rounds per model")
    ap.add_argument("--check", action="store_true", help="print the permutation importance table")
    args = ap.parse_args(argv)

    rng = np.random.default_rng(args.seed)
    os.makedirs(args.out, exist_ok=True)

    # Baseline week: training data and traffic from the baseline world.
    xb_train, sb_train, _, yb_train = week(rng, args.train_searches, 1.0, 1)
    xb, _, sid_b, yb = week(rng, args.traffic_searches, 1.0, 100001)
    # Candidate week: the surge changes the utility; the pipeline fault loses
    # values after the outcome happened (the traveller saw the true listing).
    xc_train, sc_train, _, yc_train = week(rng, args.train_searches, SURGE_FACTOR, 1)
    xc_train = lose_values(rng, xc_train, PIPELINE_FAULT, MISSING_SHARE)
    xc, _, sid_c, yc = week(rng, args.traffic_searches, SURGE_FACTOR, 200001)
    xc = lose_values(rng, xc, PIPELINE_FAULT, MISSING_SHARE)
    xc[WENT_CONSTANT] = np.full(len(sid_c), WENT_CONSTANT_VALUE)  # broken join in serving

    base = train(xb_train, sb_train, yb_train, args.seed, args.rounds)
    cand = train(xc_train, sc_train, yc_train, args.seed, args.rounds)

    write_model(os.path.join(args.out, "baseline.json.gz"), base)
    write_model(os.path.join(args.out, "candidate.json.gz"), cand)
    write_traffic(os.path.join(args.out, "traffic_baseline.csv"), xb, sid_b, yb)
    write_traffic(os.path.join(args.out, "traffic_candidate.csv"), xc, sid_c, yc)
    write_costs(os.path.join(args.out, "costs.csv"))

    stable = [f for f in FEATURES if f not in {PIPELINE_FAULT, SURGE, WENT_CONSTANT, *NO_SIGNAL_COSTLY}]
    truth = {
        "seed": args.seed,
        "xgboost_version": xgb.__version__,
        "objective": PARAMS["objective"],
        "rounds": args.rounds,
        "max_depth": PARAMS["max_depth"],
        "eta": PARAMS["eta"],
        "features": FEATURES,
        "label": {"column": "booked", "values": {"0": "not clicked", "1": "clicked", "2": "booked"}},
        "query_column": "search_id",
        "rows": {"traffic_baseline": int(len(sid_b)), "traffic_candidate": int(len(sid_c))},
        "searches": {"traffic_baseline": args.traffic_searches, "traffic_candidate": args.traffic_searches,
                     "training_per_week": args.train_searches},
        "roles": {
            "pipeline_fault": PIPELINE_FAULT,
            "surge": SURGE,
            "went_constant": WENT_CONSTANT,
            "no_signal_costly": NO_SIGNAL_COSTLY,
            "stable": stable,
            "unpriced": UNPRICED,
        },
        "pipeline_fault": {"feature": PIPELINE_FAULT, "missing_share_candidate": MISSING_SHARE,
                           "where": "candidate training data and candidate traffic"},
        "surge": {"feature": SURGE, "effect_factor": SURGE_FACTOR,
                  "where": "true utility of the candidate week; distribution unchanged"},
        "went_constant": {"feature": WENT_CONSTANT, "value": WENT_CONSTANT_VALUE,
                          "where": "candidate traffic only; training data intact"},
        "no_signal_costly": {"features": NO_SIGNAL_COSTLY, "where": "no part in the utility of either week"},
        "cost_groups_blocked": {"vision": "photo_room_coverage carries signal, so image_quality_score cannot be pruned alone"},
        "removal_saving_cpu_ms_per_1k_rows": {"traveller_host_affinity": 25.0},
    }
    with open(os.path.join(args.out, "truth.json"), "w") as f:
        json.dump(truth, f, indent=1)
        f.write("\n")

    if args.check:
        check(base, cand, (xb, sid_b, yb), (xc, sid_c, yc), args.seed)


def check(base, cand, tb, tc, seed):
    """Prints permutation-drop shares (scikit-learn 1.2.1 permutation_importance,
    NDCG@10 per search averaged, 20 repeats) and the planted ratios."""
    from sklearn.inspection import permutation_importance
    from sklearn.metrics import ndcg_score

    class Ranker:
        def __init__(self, bst):
            self.bst = bst

        def fit(self, x, y):
            return self

    def scorer_for(sid):
        # Pad every search to the widest one with relevance 0 and a score below
        # every real score, so one ndcg_score call covers all searches; a pad
        # never enters the top 10 because every search has at least 20 rows.
        starts = np.flatnonzero(np.r_[True, sid[1:] != sid[:-1]])
        ends = np.r_[starts[1:], len(sid)]
        width = int((ends - starts).max())
        slot = np.concatenate([np.arange(e - s) for s, e in zip(starts, ends)])
        grp = np.repeat(np.arange(len(starts)), ends - starts)

        def score(est, x, y):
            m = est.bst.predict(xgb.DMatrix(x, missing=np.nan, feature_names=FEATURES), output_margin=True)
            ys = np.zeros((len(starts), width))
            ms = np.full((len(starts), width), -1e9)
            ys[grp, slot] = y
            ms[grp, slot] = m
            return ndcg_score(ys, ms, k=10)
        return score

    out = {}
    for mname, bst in (("B", base), ("C", cand)):
        for tname, (x, sid, y) in (("Tb", tb), ("Tc", tc)):
            r = permutation_importance(Ranker(bst), matrix(x), y, scoring=scorer_for(sid),
                                       n_repeats=20, random_state=seed)
            drop = r.importances_mean
            share = np.clip(drop, 0, None) / np.clip(drop, 0, None).sum()
            out[mname + "/" + tname] = (drop, share)
    keys = ["B/Tb", "C/Tb", "B/Tc", "C/Tc"]
    print("seed %d  share of permutation drop (NDCG@10)" % seed)
    print("%-31s" % "feature" + "".join("%9s" % k for k in keys) + "   C/B@Tb  C/B@Tc  Cc/Bb")
    for j, f in enumerate(FEATURES):
        s = [out[k][1][j] for k in keys]
        def ratio(a, b):
            return a / b if b > 0 else float("inf") if a > 0 else float("nan")
        print("%-31s" % f + "".join("%9.4f" % v for v in s) +
              "  %6.2f  %6.2f  %6.2f" % (ratio(s[1], s[0]), ratio(s[3], s[2]), ratio(s[3], s[0])))
    print("%-31s" % "sum of drops" + "".join("%9.4f" % out[k][0].sum() for k in keys))
    j = FEATURES.index(WENT_CONSTANT)
    print("raw drop of %s: " % WENT_CONSTANT + "  ".join("%s %.6f" % (k, out[k][0][j]) for k in keys))
    for name, bst in (("baseline", base), ("candidate", cand)):
        w = bst.get_score(importance_type="weight")
        print("splits %-9s " % name + "  ".join("%s=%d" % (f, w.get(f, 0)) for f in NO_SIGNAL_COSTLY + [WENT_CONSTANT, PIPELINE_FAULT, SURGE]))


if __name__ == "__main__":
    main(sys.argv[1:])
