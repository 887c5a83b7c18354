#!/usr/bin/python3
"""Writes the reference values for the audit package's two-sample statistic.

Run with Debian's packages (python3-scipy 1.10.1, python3-numpy) from the
repository root:  /usr/bin/python3 testdata/reference/audit/make_audit_refs.py
Output goes beside this script:

  ks.json  pairs of invented samples (JSON null marks a missing value) and
           scipy.stats.ks_2samp(a, b).statistic on their non-missing values,
           the largest distance between the two empirical distribution
           functions.

Every input is a hand-made case or a seeded random vector; no real data.
The Go side (audit.KS) drops missing values itself, so the script drops them
before calling SciPy: ks_2samp in 1.10.1 has no missing-value policy.
"""
import json
import math
import os

import numpy as np
import scipy
import scipy.stats

HERE = os.path.dirname(os.path.abspath(__file__))


def cases():
    rng = np.random.default_rng(20240611)
    yield ("ties within and across samples",
           [1, 2, 2, 3, 3, 3, 4], [2, 3, 3, 5, 5])
    yield ("missing values dropped",
           [0.5, None, 1.5, 2.5, None, 3.5, 1.5], [None, 1.0, 1.5, 4.0, None])
    yield ("unequal sizes 300 and 7",
           list(rng.normal(0.0, 1.0, 300)), list(rng.normal(0.4, 1.5, 7)))
    yield ("rounded normals with many ties",
           list(np.round(rng.normal(0.0, 1.0, 200), 1)),
           list(np.round(rng.normal(0.3, 1.0, 150), 1)))
    yield ("small integer counts, heavy ties",
           [float(v) for v in rng.poisson(2.0, 500)],
           [float(v) for v in rng.poisson(2.4, 480)])
    a = list(np.round(rng.uniform(0.0, 10.0, 50), 2))
    yield ("identical samples", a, list(a))
    yield ("disjoint samples", [1.0, 2.0, 3.0], [4.0, 5.0])
    yield ("one value each", [2.0], [2.0])
    yield ("one sample constant", [3.0] * 20, list(np.round(rng.uniform(2.0, 4.0, 30), 1)))
    b = list(rng.exponential(1.0, 120))
    for i in range(0, 120, 7):
        b[i] = None
    yield ("exponential with every seventh value missing",
           list(rng.exponential(1.2, 90)), b)


def finite(xs):
    return [float(x) for x in xs if x is not None and not math.isnan(x)]


def main():
    out = []
    for name, a, b in cases():
        a = [None if x is None else float(x) for x in a]
        b = [None if x is None else float(x) for x in b]
        stat = scipy.stats.ks_2samp(finite(a), finite(b)).statistic
        out.append({"name": name, "a": a, "b": b, "statistic": float(stat)})
    doc = {
        "source": "scipy.stats.ks_2samp(a, b).statistic, SciPy %s, NumPy %s" % (scipy.__version__, np.__version__),
        "missing": "null marks a missing value; it is dropped before ks_2samp",
        "cases": out,
    }
    with open(os.path.join(HERE, "ks.json"), "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
