#!/usr/bin/env python3
"""Reference fits for the penalized-spline calibration tests.

Writes tests/fixtures/methods/spline_reference.json: a seeded sample of
(log-odds, label) pairs and, for fixed smoothing parameters, the penalized
maximum-likelihood coefficients, the effective degrees of freedom and the
predictions on a grid that reaches beyond the data range.

The fit is computed independently of the Rust code: the basis comes from
scipy.interpolate.BSpline.design_matrix on the knot vector
t_i = lo + (i - 3) h, i = 0 .. K + 6, h = (hi - lo) / K (cubic, K + 3 functions);
the penalty is D'D with D = numpy.diff(identity, n=2); the objective
sum(softplus(eta) - y eta) + lambda/2 |D beta|^2 is minimised by Newton's method
with step halving and numpy.linalg.solve, until the step is below 1e-13.
Outside [lo, hi] the prediction continues linearly with the boundary value and
the boundary derivative (BSpline.derivative).

Run: pip install numpy scipy && python3 scripts/fixtures_spline.py
The library versions are recorded in the fixture's "generator" field.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy.interpolate import BSpline

OUT = os.path.join(os.path.dirname(__file__), "..", "tests", "fixtures", "methods",
                   "spline_reference.json")


def softplus(z):
    return np.maximum(z, 0.0) + np.log1p(np.exp(-np.abs(z)))


def sigmoid(z):
    return 0.5 * (1.0 + np.tanh(0.5 * z))


def knots(lo, hi, k_int):
    h = (hi - lo) / k_int
    return lo + (np.arange(k_int + 7) - 3.0) * h


def fit(x, y, k_int, lam):
    lo, hi = x.min(), x.max()
    t = knots(lo, hi, k_int)
    # The last knot lo + K h can round a hair below hi: clip to the base interval.
    xc = np.clip(x, t[3], t[k_int + 3])
    B = BSpline.design_matrix(xc, t, 3).toarray()
    m = B.shape[1]
    D = np.diff(np.eye(m), n=2, axis=0)
    P = D.T @ D
    ybar = y.mean()
    beta = np.full(m, np.log(ybar / (1 - ybar)))

    def obj(b):
        eta = B @ b
        return np.sum(softplus(eta) - y * eta) + 0.5 * lam * b @ P @ b

    f = obj(beta)
    for _ in range(200):
        eta = B @ beta
        p = sigmoid(eta)
        g = B.T @ (p - y) + lam * P @ beta
        W = p * (1 - p)
        H = B.T @ (B * W[:, None]) + lam * P
        step = -np.linalg.solve(H, g)
        s = 1.0
        while s > 1e-12:
            nb = beta + s * step
            nf = obj(nb)
            if nf <= f + 1e-4 * s * g @ step:
                break
            s /= 2
        beta, f = nb, nf
        if np.max(np.abs(s * step)) < 1e-13:
            break
    eta = B @ beta
    p = sigmoid(eta)
    W = p * (1 - p)
    data = B.T @ (B * W[:, None])
    edf = float(np.trace(np.linalg.solve(data + lam * P, data)))
    nll = float(np.sum(softplus(eta) - y * eta))
    spl = BSpline(t, beta, 3, extrapolate=False)
    dspl = spl.derivative()
    grid = np.linspace(lo - 2.0, hi + 2.0, 41)
    out = []
    for g_ in grid:
        a, b = t[3], t[k_int + 3]
        if g_ < lo:
            v = spl(a) + dspl(a) * (g_ - lo)
        elif g_ > hi:
            v = spl(b) + dspl(b) * (g_ - hi)
        else:
            v = spl(min(g_, b))
        out.append(float(sigmoid(v)))
    return {
        "intervals": k_int,
        "lambda": lam,
        "coefficients": [float(b) for b in beta],
        "edf": edf,
        "nll": nll,
        "grid": [float(g_) for g_ in grid],
        "predictions": out,
    }


def main():
    rng = np.random.default_rng(20240611)
    n = 400
    x = rng.normal(0.0, 1.5, n)
    # A bent monotone true map on the log-odds scale.
    true_logit = 0.9 * x + 0.6 * np.tanh(2.0 * x) - 0.3
    y = (rng.uniform(size=n) < sigmoid(true_logit)).astype(float)
    fits = [fit(x, y, 8, 0.5), fit(x, y, 8, 20.0), fit(x, y, 20, 3.0)]
    doc = {
        "generator": {
            "script": "scripts/fixtures_spline.py",
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
        },
        "x": [float(v) for v in x],
        "y": [int(v) for v in y],
        "fits": fits,
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print("wrote", os.path.normpath(OUT))


if __name__ == "__main__":
    main()
