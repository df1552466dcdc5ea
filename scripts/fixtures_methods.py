#!/usr/bin/env python3
"""Reference fixtures for the calibration methods (read by tests/methods_reference.rs).

How it was made: run from the repository root with
    pip install numpy scipy scikit-learn statsmodels
    python3 scripts/fixtures_methods.py
It writes JSON files under tests/fixtures/methods/. Every file carries a
"generator" header with this script's name and the library versions used; the
versions are also printed. Inputs are drawn from numpy's seeded default_rng, so
re-running with the same library versions reproduces the files.

Reference computations (independent of the Rust code):
  platt.json        statsmodels Logit (unpenalised, Newton) of y on [1, s]
  isotonic.json     scipy.optimize.isotonic_regression on tie-free data, and
                    sklearn IsotonicRegression(out_of_bounds="clip") with ties
  beta.json         statsmodels Logit of y on [1, ln s, -ln(1-s)]; the tied form
                    on [1, logit s]; a case with a negative coefficient and the
                    one-feature refit
  binning.json      numpy equal-mass bins (thresholds at order statistics)
  temperature.json  scipy.optimize.minimize_scalar of the negative log-likelihood in T
  centered.json     centred isotonic points from sklearn's isotonic fit (runs of
                    equal fitted values) and numpy.interp
  separation.json   whether the maximum-likelihood fit exists, by the linear
                    programme of Albert & Anderson (1984): the sample is
                    (quasi-)separated iff some beta != 0 has y'_i x_i.beta >= 0 for
                    all i (y' = +-1); solved with scipy.optimize.linprog (HiGHS)
"""

import json
import os
import sys

import numpy as np
import scipy
import sklearn
import statsmodels
import statsmodels.api as sm
from scipy.optimize import isotonic_regression, linprog, minimize_scalar
from sklearn.isotonic import IsotonicRegression

OUT = os.path.join("tests", "fixtures", "methods")
EPS = 1e-12  # LOGIT_EPS of the Rust crate

GENERATOR = {
    "script": "scripts/fixtures_methods.py",
    "python": sys.version.split()[0],
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "scikit-learn": sklearn.__version__,
    "statsmodels": statsmodels.__version__,
}


def fl(a):
    return [float(v) for v in np.asarray(a).ravel()]


def ints(a):
    return [int(v) for v in np.asarray(a).ravel()]


def write(name, cases, note):
    os.makedirs(OUT, exist_ok=True)
    path = os.path.join(OUT, name)
    with open(path, "w") as f:
        json.dump({"generator": GENERATOR, "note": note, "cases": cases}, f)
        f.write("\n")
    print(f"wrote {path} ({os.path.getsize(path)} bytes)")


def logit_fit(X, y):
    res = sm.Logit(y, sm.add_constant(X, has_constant="add")).fit(
        method="newton", maxiter=200, tol=1e-14, disp=0
    )
    return res.params


def platt_cases(rng):
    cases = []
    for name, n, kind in [("prob-60", 60, "p"), ("prob-400", 400, "p"), ("margin-150", 150, "m")]:
        if kind == "p":
            s = rng.beta(2.0, 3.0, n)
            y = rng.random(n) < np.clip(1.5 * s - 0.1, 0.02, 0.98)
        else:
            s = rng.normal(0.0, 2.0, n)
            y = rng.random(n) < 1.0 / (1.0 + np.exp(-(0.7 * s + 0.3)))
        b, a = logit_fit(s, y.astype(float))
        cases.append({"name": name, "scores": fl(s), "labels": ints(y), "a": float(a), "b": float(b)})
    return cases


def isotonic_cases(rng):
    cases = []
    # Tie-free: scipy's PAV on labels ordered by score.
    for name, n in [("distinct-40", 40), ("distinct-300", 300)]:
        s = rng.random(n)
        y = rng.random(n) < s
        order = np.argsort(s)
        fitted = isotonic_regression(y[order].astype(float)).x
        new = np.concatenate([[-0.5, 1.5], rng.random(25)])
        pred = np.interp(new, s[order], fitted)
        cases.append({
            "name": name, "reference": "scipy.optimize.isotonic_regression",
            "scores": fl(s), "labels": ints(y),
            "sorted_scores": fl(s[order]), "fitted": fl(fitted),
            "new": fl(new), "predicted": fl(pred),
        })
    # Ties: scores rounded to a coarse grid; sklearn handles ties by averaging.
    for name, n, grid in [("ties-80", 80, 10), ("ties-500", 500, 40)]:
        s = np.round(rng.random(n) * grid) / grid
        y = rng.random(n) < s * 0.8 + 0.1
        ir = IsotonicRegression(out_of_bounds="clip").fit(s, y.astype(float))
        new = np.concatenate([[-1.0, 2.0], rng.random(25)])
        cases.append({
            "name": name, "reference": "sklearn.isotonic.IsotonicRegression(out_of_bounds=clip)",
            "scores": fl(s), "labels": ints(y),
            "fitted_at_scores": fl(ir.predict(s)),
            "new": fl(new), "predicted": fl(ir.predict(new)),
        })
    return cases


def beta_cases(rng):
    cases = []

    def feats(s):
        s = np.clip(s, EPS, 1 - EPS)
        return np.log(s), -np.log1p(-s)

    for name, n, (a, b, c) in [("beta-200", 200, (1.5, 0.7, -0.2)), ("beta-1000", 1000, (0.6, 2.0, 0.5))]:
        s = rng.beta(1.5, 1.5, n)
        x1, x2 = feats(s)
        y = rng.random(n) < 1.0 / (1.0 + np.exp(-(a * x1 + b * x2 + c)))
        c_full, a_full, b_full = logit_fit(np.column_stack([x1, x2]), y.astype(float))
        c_tied, a_tied = logit_fit(x1 + x2, y.astype(float))
        cases.append({
            "name": name, "scores": fl(s), "labels": ints(y),
            "full": {"a": float(a_full), "b": float(b_full), "c": float(c_full)},
            "tied": {"a": float(a_tied), "c": float(c_tied)},
        })
    # Negative b: the true map decreases near s = 1, so the full fit has b < 0
    # and a monotone fit drops the -ln(1-s) feature (b = 0) and refits on ln s.
    n = 400
    s = rng.beta(1.2, 1.2, n)
    x1, x2 = feats(s)
    y = rng.random(n) < 1.0 / (1.0 + np.exp(-(2.0 * x1 - 0.8 * x2 + 0.5)))
    c_full, a_full, b_full = logit_fit(np.column_stack([x1, x2]), y.astype(float))
    assert b_full < 0 and a_full > 0, (a_full, b_full)
    c_red, a_red = logit_fit(x1, y.astype(float))
    assert a_red > 0
    cases.append({
        "name": "negative-b-400", "scores": fl(s), "labels": ints(y),
        "full_unconstrained": {"a": float(a_full), "b": float(b_full), "c": float(c_full)},
        "full": {"a": float(a_red), "b": 0.0, "c": float(c_red)},
    })
    # Margin scores: s = sigmoid(m), features ln sigmoid(m) = -logaddexp(0, -m)
    # and -ln(1 - sigmoid(m)) = logaddexp(0, m).
    n = 300
    m = rng.normal(0.0, 2.5, n)
    x1, x2 = -np.logaddexp(0.0, -m), np.logaddexp(0.0, m)
    y = rng.random(n) < 1.0 / (1.0 + np.exp(-(0.8 * x1 + 1.6 * x2 - 0.3)))
    c_full, a_full, b_full = logit_fit(np.column_stack([x1, x2]), y.astype(float))
    c_tied, a_tied = logit_fit(m, y.astype(float))
    cases.append({
        "name": "margin-300", "score_kind": "margin", "scores": fl(m), "labels": ints(y),
        "full": {"a": float(a_full), "b": float(b_full), "c": float(c_full)},
        "tied": {"a": float(a_tied), "c": float(c_tied)},
    })
    return cases


def separated(X, y):
    """True when some beta != 0 has y'_i * (x_i . beta) >= 0 for every row."""
    A = np.column_stack([X, np.ones(len(y))]) * np.where(y, 1.0, -1.0)[:, None]
    k = A.shape[1]
    r = linprog(np.zeros(k), A_ub=-A, b_ub=np.zeros(len(y)),
                A_eq=A.sum(axis=0)[None, :], b_eq=[1.0],
                bounds=[(None, None)] * k, method="highs")
    return r.status == 0


def separation_cases(rng):
    cases = []
    grid = np.arange(1, 10) / 10.0
    while len(cases) < 300:
        n = int(rng.integers(4, 13))
        s = rng.choice(grid, n)
        if len(np.unique(s)) < 3:
            continue
        y = rng.random(n) < 0.5
        if y.all() or not y.any():
            continue
        x1, x2 = np.log(s), -np.log1p(-s)
        cases.append({
            "scores": fl(s), "labels": ints(y),
            "full": bool(separated(np.column_stack([x1, x2]), y)),
            "one_feature": bool(separated(np.log(s / (1 - s))[:, None], y)),
        })
    print("separation: full separated", sum(c["full"] for c in cases),
          "one-feature separated", sum(c["one_feature"] for c in cases), "of", len(cases))
    return cases


def equal_mass_bins(s, y, bins):
    """Thresholds at order statistics: nominal bin j ends at rank floor((j+1)n/B);
    a row belongs to the first bin whose threshold score is >= its score, so a
    tie group straddling an edge falls into the lower bin and repeated
    thresholds (empty bins) vanish."""
    n = len(s)
    xs = np.sort(s)
    ends = (np.arange(1, bins + 1) * n) // bins
    ends = ends[ends > 0]
    thr = np.unique(xs[ends - 1])
    idx = np.searchsorted(thr, s, side="left")
    k = len(thr)
    rows = np.bincount(idx, minlength=k).astype(float)
    pos = np.bincount(idx, weights=y.astype(float), minlength=k)
    lo = np.array([s[idx == j].min() for j in range(k)])
    hi = np.array([s[idx == j].max() for j in range(k)])
    return rows, pos, lo, hi


def binning_cases(rng):
    cases = []
    for name, n, bins, grid, m in [
        ("distinct-97-b10", 97, 10, None, 0.0),
        ("ties-200-b10", 200, 10, 12, 0.0),
        ("ties-60-b15-m2", 60, 15, 8, 2.0),
        ("few-7-b10", 7, 10, None, 0.0),
    ]:
        s = rng.random(n)
        if grid:
            s = np.round(s * grid) / grid
        y = rng.random(n) < s
        rows, pos, lo, hi = equal_mass_bins(s, y, bins)
        pi = y.mean()
        value = (pos + m * pi) / (rows + m)
        cuts = hi[:-1] / 2 + lo[1:] / 2
        new = np.concatenate([[-1.0, 2.0], cuts, rng.random(30)])
        pred = value[np.searchsorted(cuts, new, side="left")]
        cases.append({
            "name": name, "bins": bins, "pseudo_count": m,
            "scores": fl(s), "labels": ints(y),
            "bin_rows": fl(rows), "bin_values": fl(value),
            "new": fl(new), "predicted": fl(pred),
        })
    return cases


def temperature_cases(rng):
    cases = []
    for name, n, kind, scale in [("margin-300-overconfident", 300, "margin", 3.0),
                                 ("margin-120-underconfident", 120, "margin", 0.5),
                                 ("prob-250", 250, "probability", 2.0)]:
        z_true = rng.normal(0, 1.5, n)
        y = rng.random(n) < 1.0 / (1.0 + np.exp(-z_true))
        z = z_true * scale
        if kind == "probability":
            scores = 1.0 / (1.0 + np.exp(-z))
            sc = np.clip(scores, EPS, 1 - EPS)
            z = np.log(sc / (1 - sc))
        else:
            scores = z

        def nll(T):
            u = z / T
            return float(np.sum(np.logaddexp(0.0, u) - y * u))

        r = minimize_scalar(nll, bounds=(1e-3, 1e3), method="bounded",
                            options={"xatol": 1e-12, "maxiter": 10000})
        cases.append({"name": name, "score_kind": kind, "scores": fl(scores),
                      "labels": ints(y), "temperature": float(r.x), "nll": float(r.fun)})
    return cases


def centered_cases(rng):
    cases = []
    for name, n, grid in [("cir-60", 60, None), ("cir-ties-300", 300, 25)]:
        s = rng.random(n)
        if grid:
            s = np.round(s * grid) / grid
        y = rng.random(n) < s
        ir = IsotonicRegression().fit(s, y.astype(float))
        ux, inv = np.unique(s, return_inverse=True)
        w = np.bincount(inv).astype(float)
        fv = ir.predict(ux)
        # Runs of equal fitted values are the pooled blocks.
        starts = np.r_[0, np.nonzero(np.diff(fv))[0] + 1]
        stops = np.r_[starts[1:], len(ux)]
        px = np.array([np.sum(ux[a:b] * w[a:b]) / np.sum(w[a:b]) for a, b in zip(starts, stops)])
        pv = fv[starts]
        new = np.concatenate([[-1.0, 2.0], ux, rng.random(30)])
        cases.append({"name": name, "scores": fl(s), "labels": ints(y),
                      "x": fl(px), "value": fl(pv), "new": fl(new),
                      "predicted": fl(np.interp(new, px, pv))})
    return cases


def main():
    for k, v in GENERATOR.items():
        print(f"{k}: {v}")
    rng = np.random.default_rng(20170420)
    write("platt.json", platt_cases(rng), "Platt (a, b) of sigma(a*s + b) from statsmodels Logit")
    write("isotonic.json", isotonic_cases(rng), "isotonic fits from scipy and scikit-learn")
    write("beta.json", beta_cases(rng), "beta calibration coefficients from statsmodels Logit")
    write("binning.json", binning_cases(rng), "equal-mass histogram binning computed with numpy")
    write("temperature.json", temperature_cases(rng), "temperature T from scipy minimize_scalar")
    write("centered.json", centered_cases(rng), "centred isotonic points from scikit-learn and numpy")
    write("separation.json", separation_cases(rng), "existence of the logistic MLE by linear programming")


if __name__ == "__main__":
    main()
