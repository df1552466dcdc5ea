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
  smooth_ece                    numpy: reflected Gaussian kernel as an explicit sum
                                of images, trapezoid rule on 8001 points, the same
                                bisection bracket [0.001, 1] and tolerance 1e-6

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
from scipy.special import expit, logit, xlogy
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


T = np.linspace(0.0, 1.0, 8001)


def smece_sigma(p, y, sigma):
    r = y - p
    h = np.zeros_like(T)
    images = int(np.ceil(10 * sigma)) + 2
    norm = 1.0 / (sigma * np.sqrt(2 * np.pi))
    for k in range(-images, images + 1):
        for centre in (p + 2 * k, -p + 2 * k):
            d = (T[None, :] - centre[:, None]) / sigma
            h += (r[:, None] * np.exp(-0.5 * d * d)).sum(axis=0) * norm
    h /= len(p)
    return np.trapezoid(np.abs(h), T)


def smece(p, y):
    lo, hi = 1e-3, 1.0
    while hi - lo > 1e-6:
        mid = 0.5 * (lo + hi)
        if smece_sigma(p, y, mid) > mid:
            lo = mid
        else:
            hi = mid
    if lo == 1e-3:
        at_min = smece_sigma(p, y, lo)
        if at_min <= lo:
            return at_min
    return 0.5 * (lo + hi)


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
