#!/usr/bin/env python3
"""Reference values for the metrics in src/metrics, read by tests/metrics_reference.rs.

Writes tests/fixtures/metrics/reference.json: simulated test sets (predictions
p, labels y, metric settings) and each metric computed by an independent
reference implementation:

  log_loss, brier, auc          scikit-learn (log_loss, brier_score_loss, roc_auc_score)
  corp_*                        scikit-learn IsotonicRegression for the PAV
                                recalibration, scipy.special.xlogy for the scores
  calibration_slope             statsmodels Logit of y on [1, logit(p)]
  calibration_intercept         statsmodels GLM Binomial, intercept only, offset logit(p)
  ici                           statsmodels lowess (frac = ici_span, it = 0,
                                delta = ici_delta * range(p)), rows ordered by (p, y)
  murphy_*, ece_*, spiegelhalter_z
                                numpy, written from the published formulas
  smooth_ece                    no outside library implements it, so a second
                                implementation by a different algorithm: reflected
                                Gaussian images with scipy.stats.norm.pdf, zeros of
                                the residual density by scipy.optimize.brentq,
                                Gauss-Legendre pieces between them, and the fixed
                                point by scipy.optimize.brentq (not bisection)

Library versions are recorded in the fixture's "versions" field. Run:

    python3 -m venv venv && venv/bin/pip install numpy scipy scikit-learn statsmodels
    venv/bin/python scripts/fixtures_metrics.py
"""
import json
import os
import platform

import numpy as np
import scipy
import sklearn
import statsmodels
import statsmodels.api as sm
from scipy.optimize import brentq
from scipy.special import expit, logit, roots_legendre, xlogy
from scipy.stats import norm
from sklearn.isotonic import IsotonicRegression
from sklearn.metrics import brier_score_loss, log_loss, roc_auc_score

OUT = os.path.join(os.path.dirname(__file__), "..", "tests", "fixtures", "metrics", "reference.json")


def width_bins(p, k):
    return np.minimum(np.floor(np.clip(p, 0, 1) * k), k - 1).astype(int)


def murphy(p, y, k):
    n = len(p)
    ybar = y.mean()
    keys = width_bins(p, k) if k > 0 else np.unique(p, return_inverse=True)[1]
    rel = res = 0.0
    for g in np.unique(keys):
        m = keys == g
        nk, pk, yk = m.sum(), p[m].mean(), y[m].mean()
        rel += nk * (pk - yk) ** 2
        res += nk * (yk - ybar) ** 2
    return rel / n, res / n, ybar * (1 - ybar)


def mean_log_loss(q, y):
    return -np.mean(xlogy(y, q) + xlogy(1 - y, 1 - q))


def corp(p, y, clip):
    rc = IsotonicRegression(increasing=True, out_of_bounds="clip").fit(p, y).predict(p)
    ybar = np.full_like(p, y.mean())
    out = {}
    s = np.mean((p - y) ** 2)
    s_rc, s_u = np.mean((rc - y) ** 2), np.mean((ybar - y) ** 2)
    out.update(corp_brier_mcb=s - s_rc, corp_brier_dsc=s_u - s_rc, corp_brier_unc=s_u)
    s = mean_log_loss(np.clip(p, clip, 1 - clip), y)
    s_rc, s_u = mean_log_loss(rc, y), mean_log_loss(ybar, y)
    out.update(corp_log_mcb=s - s_rc, corp_log_dsc=s_u - s_rc, corp_log_unc=s_u)
    return out


def ece_width(p, y, k):
    b = width_bins(p, k)
    return sum(abs(p[b == j].sum() - y[b == j].sum()) for j in range(k)) / len(p)


def ece_mass(p, y, k):
    order = np.argsort(p, kind="stable")
    ps, ys = p[order], y[order]
    n = len(p)
    ends, prev = [], 0
    for j in range(1, k):
        e = j * n // k
        if e <= prev:
            continue
        while e < n and ps[e] == ps[e - 1]:
            e += 1
        if e >= n:
            break
        ends.append(e)
        prev = e
    ends.append(n)
    total, start = 0.0, 0
    for e in ends:
        total += abs(ps[start:e].sum() - ys[start:e].sum())
        start = e
    return total / n


def spiegelhalter(p, y):
    a = 1 - 2 * p
    return np.sum((y - p) * a) / np.sqrt(np.sum(a * a * p * (1 - p)))


# smooth ECE: a second implementation by a different algorithm (no outside
# library implements it). It shares only the definition with src/metrics/smooth_ece.rs:
# the residual density is a sum of reflected Gaussian images evaluated with
# scipy.stats.norm.pdf (not the cosine series); the integral of |h| is taken
# between zeros found by scipy.optimize.brentq, with Gauss-Legendre rules
# (scipy.special.roots_legendre) on pieces no longer than sigma / 2 (not the
# antiderivative of the series); the fixed point smECE_sigma = sigma is found by
# scipy.optimize.brentq to 1e-13 (not by bisection), so the reference is the
# fixed point itself, not the midpoint of a bracket.
GL_NODES = 24


def residual_density(p, y, sigma):
    """t -> (1/n) sum_i r_i K_sigma(t, p_i), K the Gaussian reflected at 0 and 1."""
    r = y - p
    k_max = int(np.ceil(5.0 * sigma)) + 2
    shifts = 2.0 * np.arange(-k_max, k_max + 1)
    centres = np.concatenate([(p[:, None] + shifts).ravel(), (-p[:, None] + shifts).ravel()])
    weights = np.concatenate([np.repeat(r, len(shifts))] * 2) / len(p)
    # Images farther than 12 sigma from [0, 1] add less than exp(-72) each.
    keep = (centres > -12.0 * sigma) & (centres < 1.0 + 12.0 * sigma)
    centres, weights = centres[keep], weights[keep]

    def h(t):
        t = np.atleast_1d(np.asarray(t, float))
        out = np.empty(len(t))
        for s in range(0, len(t), 256):
            out[s:s + 256] = norm.pdf(t[s:s + 256, None], loc=centres[None, :], scale=sigma) @ weights
        return out

    return h


def smece_sigma(p, y, sigma):
    h = residual_density(p, y, sigma)
    grid = np.linspace(0.0, 1.0, max(2001, int(np.ceil(20.0 / sigma)) + 1))
    v = h(grid)
    zeros = [0.0]
    for j in np.nonzero(np.sign(v[:-1]) * np.sign(v[1:]) < 0)[0]:
        a, b = grid[j], grid[j + 1]
        if h(a)[0] * h(b)[0] < 0:
            zeros.append(brentq(lambda t: h(t)[0], a, b, xtol=1e-15, rtol=1e-15))
        else:
            # The sign change is within rounding of zero: either end will do.
            zeros.append(a if abs(v[j]) < abs(v[j + 1]) else b)
    zeros.append(1.0)
    nodes, wts = roots_legendre(GL_NODES)
    ts, ws, piece = [], [], []
    for i, (a, b) in enumerate(zip(zeros[:-1], zeros[1:])):
        edges = np.linspace(a, b, max(1, int(np.ceil((b - a) / (0.5 * sigma)))) + 1)
        for u, w in zip(edges[:-1], edges[1:]):
            ts.append(0.5 * (w - u) * nodes + 0.5 * (w + u))
            ws.append(0.5 * (w - u) * wts)
            piece.append(np.full(GL_NODES, i))
    vals = h(np.concatenate(ts)) * np.concatenate(ws)
    sums = np.bincount(np.concatenate(piece), weights=vals, minlength=len(zeros) - 1)
    return float(np.abs(sums).sum())


def smece(p, y):
    """smECE at the fixed point sigma* of sigma -> smECE_sigma on [0.001, 1];
    the value at 0.001 when smECE_0.001 <= 0.001 (the definition's lower end)."""
    lo, hi = 1e-3, 1.0
    if smece_sigma(p, y, lo) <= lo:
        return smece_sigma(p, y, lo)
    return brentq(lambda s: smece_sigma(p, y, s) - s, lo, hi, xtol=1e-13, rtol=1e-13)


def ici(p, y, span, delta):
    order = np.lexsort((y, p))
    ps, ys = p[order], y[order]
    fit = sm.nonparametric.lowess(
        ys, ps, frac=span, it=0, delta=delta * (ps[-1] - ps[0]), is_sorted=True, return_sorted=False
    )
    return np.mean(np.abs(fit - ps))


def slope_intercept(p, y, clip):
    x = logit(np.clip(p, clip, 1 - clip))
    slope = sm.Logit(y, sm.add_constant(x)).fit(disp=0, method="newton", tol=1e-12, maxiter=200).params[1]
    glm = sm.GLM(y, np.ones_like(x), family=sm.families.Binomial(), offset=x).fit(tol=1e-14, maxiter=200)
    return float(slope), float(glm.params[0])


def case(name, p, y, settings, rng_note):
    s = {"log_loss_clip": 1e-6, "ece_bins": 10, "murphy_bins": 10, "ici_span": 0.75, "ici_delta": 0.01}
    s.update(settings)
    y = y.astype(float)
    e = {}
    clip = s["log_loss_clip"]
    if p.min() >= clip and p.max() <= 1 - clip:
        e["log_loss"] = log_loss(y, p)  # no row is clipped, so sklearn's rule applies
    else:
        e["log_loss"] = mean_log_loss(np.clip(p, clip, 1 - clip), y)
    e["brier"] = brier_score_loss(y, p)
    e["auc"] = roc_auc_score(y, p)
    e["murphy_rel"], e["murphy_res"], e["murphy_unc"] = murphy(p, y, s["murphy_bins"])
    e.update(corp(p, y, clip))
    e["ece_width"] = ece_width(p, y, s["ece_bins"])
    e["ece_mass"] = ece_mass(p, y, s["ece_bins"])
    e["smooth_ece"] = smece(p, y)
    e["smooth_ece_at_0.05"] = smece_sigma(p, y, 0.05)
    e["smooth_ece_at_0.2"] = smece_sigma(p, y, 0.2)
    e["calibration_slope"], e["calibration_intercept"] = slope_intercept(p, y, clip)
    e["spiegelhalter_z"] = spiegelhalter(p, y)
    e["ici"] = ici(p, y, s["ici_span"], s["ici_delta"])
    e["ici_delta_0"] = ici(p, y, s["ici_span"], 0.0)
    return {
        "name": name,
        "how": rng_note,
        "settings": s,
        "p": [float(v) for v in p],
        "y": [int(v) for v in y],
        "expected": {k: float(v) for k, v in e.items()},
    }


def main():
    rng = np.random.default_rng(20240611)
    cases = []

    q = rng.beta(2, 3, 600)
    cases.append(case("calibrated", q, rng.random(600) < q, {},
                      "p ~ Beta(2,3), y ~ Bernoulli(p), n = 600"))

    q = rng.random(800)
    p = expit(2.0 * logit(q) + 0.4)
    cases.append(case("overconfident", p, rng.random(800) < q, {"ece_bins": 15, "ici_span": 0.5},
                      "q ~ U(0,1), y ~ Bernoulli(q), p = expit(2 logit q + 0.4), n = 800"))

    q = rng.beta(1.5, 1.5, 500)
    p = np.clip(np.round(q * 20) / 20, 0.0, 1.0)
    cases.append(case("ties_and_extremes", p, rng.random(500) < q,
                      {"murphy_bins": 0, "ece_bins": 8, "log_loss_clip": 1e-4},
                      "q ~ Beta(1.5,1.5), y ~ Bernoulli(q), p = q rounded to 0.05 (0 and 1 occur), n = 500"))

    q = rng.random(60)
    p = 0.15 + 0.7 * q
    cases.append(case("small_underconfident", p, rng.random(60) < q, {"ece_bins": 5, "ici_delta": 0.05},
                      "q ~ U(0,1), y ~ Bernoulli(q), p = 0.15 + 0.7 q, n = 60"))

    doc = {
        "generated_by": "scripts/fixtures_metrics.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "cases": cases,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
