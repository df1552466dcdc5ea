#!/usr/bin/env python3
"""Binned ECE reference fixture (read by tests/metrics_reference.rs).

How it was made: run from the repository root with
    pip install numpy
    python3 scripts/fixtures_ece.py
It writes tests/fixtures/metrics/ece_binned.json with the numpy version in its
"generator" header. Inputs are drawn from numpy's seeded default_rng, so
re-running with the same numpy version reproduces the file.

Reference computation, from the published formula (Naeini, Cooper &
Hauskrecht 2015, AAAI; Guo, Pleiss, Sun & Weinberger 2017, ICML):

    ECE = sum over non-empty bins k of (n_k / n) * |mean p in k - mean y in k|

  ece_width  bins from numpy.histogram(p, bins=K, range=(0, 1)): its own
             edges (numpy.linspace) and its own rule (right-open bins, the
             last closed at 1); n_k, sum p and sum y are three histograms
             (the last two with weights).
  ece_mass   bins from order statistics: with x the sorted predictions, the
             thresholds are x[floor(j n / K) - 1] for j = 1 .. K-1 (repeated
             values kept once), and a row goes to the first bin whose
             threshold is >= its prediction (numpy.searchsorted, side
             "left"), rows above every threshold to the last bin. Tied
             predictions therefore share a bin.

Bin edges: numpy.histogram compares a prediction with the double nearest to
its edge as numpy.linspace computes it. For K = 10 that edge is
0.30000000000000004 for 3/10, so the double written "0.3" (just below 3/10)
lands in the bin below, whereas a bin of floor(p K) puts it in the bin above.
The cases here put predictions on bin edges only where every edge k/K is an
exact double (K a power of two, predictions on a grid of 1/64), where both
readings agree; the script checks that no other case has a prediction on an
edge (none within 1e-9 / K of one).
"""

import json
import os
import sys

import numpy as np

OUT = os.path.join("tests", "fixtures", "metrics", "ece_binned.json")

GENERATOR = {
    "script": "scripts/fixtures_ece.py",
    "python": sys.version.split()[0],
    "numpy": np.__version__,
}


def expit(x):
    return 1.0 / (1.0 + np.exp(-x))


def logit(q):
    return np.log(q / (1.0 - q))


def ece_from_bins(n_k, sum_p, sum_y, n):
    keep = n_k > 0
    gap = np.abs(sum_p[keep] / n_k[keep] - sum_y[keep] / n_k[keep])
    return float(np.sum(n_k[keep] / n * gap))


def ece_width(p, y, k):
    n_k, edges = np.histogram(p, bins=k, range=(0.0, 1.0))
    sum_p, _ = np.histogram(p, bins=k, range=(0.0, 1.0), weights=p)
    sum_y, _ = np.histogram(p, bins=k, range=(0.0, 1.0), weights=y)
    assert n_k.sum() == len(p)
    return ece_from_bins(n_k.astype(float), sum_p, sum_y, len(p)), edges


def ece_mass(p, y, k):
    n = len(p)
    x = np.sort(p)
    ranks = (np.arange(1, k) * n) // k
    thr = np.unique(x[ranks[ranks > 0] - 1])
    idx = np.searchsorted(thr, p, side="left")
    m = len(thr) + 1
    n_k = np.bincount(idx, minlength=m).astype(float)
    sum_p = np.bincount(idx, weights=p, minlength=m)
    sum_y = np.bincount(idx, weights=y, minlength=m)
    return ece_from_bins(n_k, sum_p, sum_y, n)


def make_case(name, how, p, y, k, edges_exact):
    y = y.astype(float)
    width, edges = ece_width(p, y, k)
    on_edge = np.isin(p, edges)
    if edges_exact:
        assert k & (k - 1) == 0 and np.all(p * 64 == np.round(p * 64)), name
    else:
        near = np.abs(p * k - np.round(p * k)) < 1e-9
        assert not near.any(), (name, p[near])
    print(f"{name}: n = {len(p)}, K = {k}, {int(on_edge.sum())} predictions on a bin edge")
    return {
        "name": name, "how": how, "bins": k,
        "p": [float(v) for v in p], "y": [int(v) for v in y],
        "ece_width": width, "ece_mass": ece_mass(p, y, k),
    }


def main():
    for key, v in GENERATOR.items():
        print(f"{key}: {v}")
    rng = np.random.default_rng(20150125)
    cases = []

    q = rng.beta(2.0, 3.0, 500)
    cases.append(make_case("calibrated-500", "p ~ Beta(2,3), y ~ Bernoulli(p)",
                           q, rng.random(500) < q, 10, False))

    q = rng.random(700)
    p = expit(2.0 * logit(q) + 0.4)
    cases.append(make_case("overconfident-700", "q ~ U(0,1), y ~ Bernoulli(q), "
                           "p = expit(2 logit q + 0.4)", p, rng.random(700) < q, 15, False))

    q = rng.random(333)
    p = 0.2 + 0.6 * q
    cases.append(make_case("underconfident-333", "q ~ U(0,1), y ~ Bernoulli(q), p = 0.2 + 0.6 q",
                           p, rng.random(333) < q, 7, False))

    q = rng.beta(1.5, 1.5, 400)
    p = np.round(q * 64) / 64
    cases.append(make_case("grid64-ties-400-k8", "q ~ Beta(1.5,1.5), y ~ Bernoulli(q), p = q "
                           "rounded to 1/64 (0, 1 and every edge k/8 occur)",
                           p, rng.random(400) < q, 8, True))
    cases.append(make_case("grid64-ties-400-k16", "the same rows with 16 bins",
                           p, np.array(cases[-1]["y"]) == 1, 16, True))

    q = rng.random(23)
    cases.append(make_case("small-23-k10", "p ~ U(0,1), y ~ Bernoulli(p), n = 23 (mass bins of "
                           "2 and 3 rows)", q, rng.random(23) < q, 10, False))

    doc = {
        "generator": GENERATOR,
        "note": "binned ECE: equal-width bins from numpy.histogram, equal-mass bins from "
                "order-statistic thresholds and numpy.searchsorted, ECE from the published "
                "weighted-gap formula",
        "cases": cases,
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as f:
        json.dump(doc, f)
        f.write("\n")
    print(f"wrote {OUT} ({os.path.getsize(OUT)} bytes)")


if __name__ == "__main__":
    main()
