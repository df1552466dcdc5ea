#!/usr/bin/env python3
"""Reference fits for the penalized-spline calibration tests, from statsmodels.

Writes tests/fixtures/methods/spline_reference.json, read by
tests/methods_spline.rs. The fits come from a general-purpose penalized GLM,
statsmodels' GLMGam (family Binomial, fitted by its penalized IRLS), not from a
copy of the crate's Newton iteration. What is shared with src/calibrate/spline.rs
is only the model's definition, handed to statsmodels as data:

  * basis: scipy.interpolate.BSpline.design_matrix on the knot vector
    t_i = lo + (i - 3) h, i = 0 .. K + 6, h = (hi - lo) / K (cubic, K + 3
    functions), passed to GLMGam through statsmodels'
    UnivariateGenericSmoother / GenericSmoothers (statsmodels' own BSplines
    class places its knots at quantiles and uses an integrated-derivative
    penalty, so it cannot express this basis);
  * penalty: D'D with D = numpy.diff(identity, n=2), passed as the smoother's
    penalty matrix. GLMGam maximises llf - alpha * beta' S beta, the crate
    minimises NLL + (lambda / 2) |D beta|^2, so alpha = lambda / 2.

Recorded per fixed lambda: statsmodels' coefficients (params), fitted
probabilities at the sample (fittedvalues), effective degrees of freedom (the
sum of GLMGamResults.edf, the trace of the hat matrix), the negative
log-likelihood (-llf), and predictions on a grid beyond the data range. Outside
[lo, hi] the crate continues the spline linearly with its boundary value and
slope; statsmodels has no such rule, so the grid predictions apply that rule to
statsmodels' coefficients with scipy's BSpline and BSpline.derivative.

Recorded per smoothing-selection case: for every lambda of the crate's grid
10^(-3), 10^(-2.5), ..., 10^7, statsmodels' edf, AIC (GLMResults.aic,
-2 llf + 2 (df_model + 1), with df_model = edf - 1 in GLMGam, i.e.
-2 llf + 2 edf) and BIC (GLMResults.bic_llf, -2 llf + ln(n) edf), the lambda
each criterion picks (ties to the larger lambda) and the gap to the runner-up.
The selection samples have at most 25 distinct log-odds per knot interval, so
the crate searches the exact points rather than a binned copy and the same
criterion values are compared.

Run: python3 -m venv venv && venv/bin/pip install numpy scipy statsmodels
     venv/bin/python scripts/fixtures_spline.py
The library versions are recorded in the fixture's "generator" field.
"""

import json
import os
import sys

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy.interpolate import BSpline
from scipy.special import expit
from statsmodels.gam.api import GLMGam
from statsmodels.gam.smooth_basis import GenericSmoothers, UnivariateGenericSmoother

OUT = os.path.join(os.path.dirname(__file__), "..", "tests", "fixtures", "methods",
                   "spline_reference.json")

# The crate's lambda grid (src/calibrate/spline.rs, lambda_grid).
GRID = [10.0 ** (-3.0 + 0.5 * i) for i in range(21)]
# statsmodels' PIRLS stops when the deviance changes by less than this.
TOL = 1e-13


def knots(lo, hi, k_int):
    h = (hi - lo) / k_int
    return lo + (np.arange(k_int + 7) - 3.0) * h


def gam_fit(x, y, k_int, lam):
    lo, hi = x.min(), x.max()
    t = knots(lo, hi, k_int)
    # The last knot lo + K h can round a hair below hi: clip to the base interval.
    xc = np.clip(x, t[3], t[k_int + 3])
    B = BSpline.design_matrix(xc, t, 3).toarray()
    m = B.shape[1]
    D = np.diff(np.eye(m), n=2, axis=0)
    P = D.T @ D
    # Derivative bases are not used by GLMGam's fit; zeros stand in.
    smoother = GenericSmoothers(
        x, [UnivariateGenericSmoother(x, B, np.zeros_like(B), np.zeros_like(B), P)])
    model = GLMGam(y, smoother=smoother, alpha=lam / 2.0, family=sm.families.Binomial())
    res = model.fit(tol=TOL, maxiter=1000)
    if not res.converged:
        raise SystemExit(f"statsmodels PIRLS did not converge: K = {k_int}, lambda = {lam}")
    return res, t


def fixed(x, y, k_int, lam):
    res, t = gam_fit(x, y, k_int, lam)
    beta = np.asarray(res.params)
    lo, hi = x.min(), x.max()
    spl = BSpline(t, beta, 3, extrapolate=False)
    dspl = spl.derivative()
    a, b = t[3], t[k_int + 3]
    grid = np.linspace(lo - 2.0, hi + 2.0, 41)
    out = []
    for g in grid:
        if g < lo:
            v = spl(a) + dspl(a) * (g - lo)
        elif g > hi:
            v = spl(b) + dspl(b) * (g - hi)
        else:
            v = spl(min(g, b))
        out.append(float(expit(v)))
    return {
        "intervals": k_int,
        "lambda": lam,
        "statsmodels_alpha": lam / 2.0,
        "coefficients": [float(v) for v in beta],
        "fitted": [float(v) for v in res.fittedvalues],
        "edf": float(np.sum(res.edf)),
        "nll": float(-res.llf),
        "grid": [float(g) for g in grid],
        "predictions": out,
    }


def pick(values):
    """Index of the smallest value, ties to the larger lambda, and the gap to the rest."""
    v = np.asarray(values)
    best = max(i for i in range(len(v)) if v[i] == v.min())
    gap = float(np.min(np.delete(v, best)) - v[best])
    return best, gap


def selection(name, how, x, y, k_int):
    assert len(np.unique(x)) <= 25 * k_int, "the crate would search a binned copy"
    aic, bic, edf = [], [], []
    for lam in GRID:
        res, _ = gam_fit(x, y, k_int, lam)
        aic.append(float(res.aic))
        bic.append(float(res.bic_llf))
        edf.append(float(np.sum(res.edf)))
    if not np.all(np.isfinite(aic + bic + edf)):
        raise SystemExit(f"{name}: statsmodels gave a non-finite criterion")
    ia, gap_a = pick(aic)
    ib, gap_b = pick(bic)
    return {
        "name": name,
        "how": how,
        "intervals": k_int,
        "x": [float(v) for v in x],
        "y": [int(v) for v in y],
        "grid": GRID,
        "edf": edf,
        "aic": aic,
        "bic": bic,
        "aic_lambda": GRID[ia],
        "aic_gap": gap_a,
        "bic_lambda": GRID[ib],
        "bic_gap": gap_b,
    }


def main():
    rng = np.random.default_rng(20240611)
    n = 400
    x = rng.normal(0.0, 1.5, n)
    # A bent monotone true map on the log-odds scale.
    true_logit = 0.9 * x + 0.6 * np.tanh(2.0 * x) - 0.3
    y = (rng.uniform(size=n) < expit(true_logit)).astype(float)
    fits = [fixed(x, y, 8, 0.5), fixed(x, y, 8, 20.0), fixed(x, y, 20, 3.0)]

    sel = []
    r = np.random.default_rng(7)
    xs = r.normal(0.0, 1.2, 300)
    ys = (r.uniform(size=300) < expit(2.5 * np.sin(1.5 * xs))).astype(float)
    sel.append(selection("wave", "x ~ N(0, 1.2^2), y ~ Bernoulli(expit(2.5 sin(1.5 x))), n = 300, "
                         "numpy default_rng(7)", xs, ys, 12))
    r = np.random.default_rng(8)
    xs = r.uniform(-3.0, 3.0, 400)
    ys = (r.uniform(size=400) < expit(0.3 * xs + 1.2 * np.tanh(2.0 * xs))).astype(float)
    sel.append(selection("steep-middle", "x ~ U(-3, 3), y ~ Bernoulli(expit(0.3 x + 1.2 tanh(2 x))), "
                         "n = 400, numpy default_rng(8)", xs, ys, 16))

    doc = {
        "generator": {
            "script": "scripts/fixtures_spline.py",
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "reference": "statsmodels GLMGam, family Binomial, PIRLS tol 1e-13, alpha = lambda / 2",
        },
        "x": [float(v) for v in x],
        "y": [int(v) for v in y],
        "fits": fits,
        "selection": sel,
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print("wrote", os.path.normpath(OUT))
    for s in sel:
        print(s["name"], "AIC", s["aic_lambda"], s["aic_gap"], "BIC", s["bic_lambda"], s["bic_gap"])


if __name__ == "__main__":
    main()
