#!/usr/bin/env python3
"""Venn-Abers reference fixture (read by tests/methods_reference.rs).

How it was made: run from the repository root with
    pip install numpy scipy scikit-learn
    python3 scripts/fixtures_venn_abers.py
It writes tests/fixtures/methods/venn_abers.json. The file carries a
"generator" header with this script's name and the library versions used; the
versions are also printed. Inputs are drawn from numpy's seeded default_rng, so
re-running with the same library versions reproduces the file.

Reference computation: the inductive Venn-Abers predictor straight from its
definition (Vovk & Petej 2014, UAI, "Venn-Abers predictors"): for a test score
s, append (s, 0) to the calibration sample, fit isotonic regression
(scikit-learn IsotonicRegression, increasing) and read the fitted value at s:
that is p0. Appending (s, 1) instead gives p1. The merged probability is
p = p1 / (1 - p0 + p1) (Vovk, Petej & Fedorova 2015, NeurIPS, eq. (1)), and
the width is the mean of p1 - p0 over a case's test scores. Two isotonic fits
per test score, no shortcut: nothing here shares code or method with the
crate's cumulative-sum-diagram algorithm.

Ties: scikit-learn merges rows with equal scores into one point (weight =
count, value = mean label) before the pool-adjacent-violators fit, so tied
scores, the test score included when it equals a calibration score, get one
fitted value (the "secondary" approach to ties of de Leeuw 1977). Every value
is also recomputed with scipy.optimize.isotonic_regression on explicitly
pooled ties, and the script stops if the two differ by more than 1e-12.
"""

import json
import os
import sys

import numpy as np
import scipy
import sklearn
from scipy.optimize import isotonic_regression
from scipy.special import expit
from sklearn.isotonic import IsotonicRegression

OUT = os.path.join("tests", "fixtures", "methods", "venn_abers.json")
AGREE = 1e-12

GENERATOR = {
    "script": "scripts/fixtures_venn_abers.py",
    "python": sys.version.split()[0],
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "scikit-learn": sklearn.__version__,
}


def fl(a):
    return [float(v) for v in np.asarray(a).ravel()]


def ints(a):
    return [int(v) for v in np.asarray(a).ravel()]


def fitted_at_sklearn(x, y, s):
    ir = IsotonicRegression(increasing=True).fit(x, y)
    return float(ir.predict(np.array([s]))[0])


def fitted_at_scipy(x, y, s):
    ux, inv = np.unique(x, return_inverse=True)
    w = np.bincount(inv).astype(float)
    mean = np.bincount(inv, weights=y) / w
    fit = isotonic_regression(mean, weights=w, increasing=True).x
    return float(fit[np.searchsorted(ux, s)])


def venn_abers(scores, labels, s):
    pair = []
    for label in (0.0, 1.0):
        x = np.append(scores, s)
        y = np.append(labels.astype(float), label)
        a = fitted_at_sklearn(x, y, s)
        b = fitted_at_scipy(x, y, s)
        assert abs(a - b) <= AGREE, (s, label, a, b)
        pair.append(a)
    p0, p1 = pair
    assert p0 <= p1, (s, p0, p1)
    return p0, p1


def make_case(name, how, scores, labels, test):
    assert labels.any() and not labels.all(), name
    p0, p1 = zip(*(venn_abers(scores, labels, s) for s in test))
    p0, p1 = np.array(p0), np.array(p1)
    merged = p1 / (1.0 - p0 + p1)
    print(f"{name}: {len(scores)} rows, {len(np.unique(scores))} distinct scores, "
          f"{int(labels.sum())} positives, {len(test)} test scores")
    return {
        "name": name, "how": how,
        "scores": fl(scores), "labels": ints(labels), "test": fl(test),
        "p0": fl(p0), "p1": fl(p1), "merged": fl(merged),
        "width": float(np.mean(p1 - p0)),
    }


def cases(rng):
    out = []

    s = rng.random(40)
    y = rng.random(40) < s
    test = np.concatenate([s, rng.random(20), [-0.5, 1.5]])
    out.append(make_case("distinct-40", "s ~ U(0,1), y ~ Bernoulli(s); test: every calibration "
                         "score, 20 uniform, two outside", s, y, test))

    levels = np.arange(12) / 11
    s = rng.choice(levels, 250)
    y = rng.random(250) < 0.1 + 0.8 * s
    test = np.concatenate([levels, (levels[:-1] + levels[1:]) / 2, rng.random(15), [-1.0, 2.0]])
    out.append(make_case("ties-250", "s on 12 levels k/11, y ~ Bernoulli(0.1 + 0.8 s); test: "
                         "every level, every midpoint, 15 uniform, two outside", s, y, test))

    s = np.round(rng.beta(2.0, 5.0, 220) * 40) / 40
    y = np.zeros(220, dtype=bool)
    y[rng.integers(220)] = True
    ux = np.unique(s)
    test = np.concatenate([ux, (ux[:-1] + ux[1:]) / 2, rng.random(10), [-1.0, 2.0]])
    out.append(make_case("one-positive-220", "s ~ Beta(2,5) rounded to 1/40, a single positive "
                         "row; test: every distinct score and midpoint, 10 uniform, two outside",
                         s, y, test))

    s = rng.normal(0.0, 1.0, 60)
    y = np.ones(60, dtype=bool)
    y[np.argmax(s)] = False
    test = np.concatenate([s, rng.normal(0.0, 1.5, 10), [-40.0, 40.0]])
    out.append(make_case("one-negative-60", "margins s ~ N(0,1), a single negative row at the "
                         "largest score; test: every calibration score, 10 ~ N(0,1.5), two "
                         "far outside", s, y, test))

    s = np.round(rng.normal(0.0, 2.0, 300) * 4) / 4
    y = rng.random(300) < expit(0.8 * s)
    ux = np.unique(s)
    test = np.concatenate([ux, ux[:-1] + 0.125, rng.normal(0.0, 3.0, 15), [-50.0, 50.0]])
    out.append(make_case("margin-ties-300", "margins s ~ N(0,2) rounded to 1/4, y ~ "
                         "Bernoulli(expit(0.8 s)); test: every distinct score and midpoint, "
                         "15 ~ N(0,3), two far outside", s, y, test))

    s = np.full(30, 0.5)
    y = np.arange(30) % 10 < 3
    out.append(make_case("one-score-30", "all 30 scores 0.5, 9 positives; test: on, below, above",
                         s, y, np.array([0.5, 0.25, 0.75])))

    s = np.array([0.3, 0.7])
    y = np.array([True, False])
    out.append(make_case("two-rows-decreasing", "(0.3, 1), (0.7, 0); test: on, between, outside",
                         s, y, np.array([0.3, 0.5, 0.7, 0.0, 1.0])))
    return out


def main():
    for k, v in GENERATOR.items():
        print(f"{k}: {v}")
    rng = np.random.default_rng(20140723)
    doc = {
        "generator": GENERATOR,
        "note": "inductive Venn-Abers p0, p1, merged p1/(1-p0+p1) and mean width from the "
                "definition: one scikit-learn IsotonicRegression fit per test score and label "
                "(ties merged by weighted mean), cross-checked with scipy isotonic_regression",
        "cases": cases(rng),
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as f:
        json.dump(doc, f)
        f.write("\n")
    print(f"wrote {OUT} ({os.path.getsize(OUT)} bytes)")


if __name__ == "__main__":
    main()
