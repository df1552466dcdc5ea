#!/usr/bin/env python3
"""Multiclass reference fixture (read by tests/multiclass_reference.rs).

How it was made: run from the repository root with
    pip install numpy scipy scikit-learn
    python3 scripts/fixtures_multiclass.py
It writes tests/fixtures/multiclass/reference.json with the library versions
in its "generator" header. Inputs are drawn from numpy's seeded default_rng,
so re-running with the same numpy version reproduces the inputs.

Data of each case: latent logits l_ik ~ N(0, 1) (n rows, K classes), labels
y_i drawn from softmax(l_i), and given logits z_ik = s_k l_ik + c_k with a
scale s_k and offset c_k per class (so the given probabilities softmax(z) are
over-confident and biased, and both temperature and vector scaling have
something to correct).

Reference computations, each from a general-purpose library or from the
published formula, independent of the Rust code:

  log_loss      sklearn.metrics.log_loss(y, p, labels=range(K)) of
                p = scipy.special.softmax(z, axis=1). sklearn clips at the
                machine epsilon, plumbline at 1e-6; the script checks that no
                probability of an observed class is below 1e-6, so the clip
                changes nothing here.
  brier         numpy: mean over rows of sum_k (p_ik - [y_i = k])^2 (Brier
                1950, the original multi-category score).
  ece_*         top-label ECE of (max_k p_ik, [argmax_k p_ik = y_i]) and
                classwise ECE (mean over k of the ECE of (p_ik, [y_i = k])),
                with 10 equal-width bins (numpy.histogram) or at most 10
                equal-mass bins (order-statistic thresholds and
                numpy.searchsorted), via ece_width / ece_mass of
                scripts/fixtures_ece.py. The script checks that no value lies
                within 1e-9 of an equal-width edge.
  temperature   scipy.optimize.minimize(method="BFGS", gtol=1e-11) over
                u = ln T of the mean log loss of softmax(z / T)
                (scipy.special.logsumexp), analytic gradient. Recorded: T, the
                gradient in u at the solution and the second derivative there
                (analytic: the mean over rows of Var_p(z) / T^2), which bound
                the distance to the true optimum.
  vector        the same minimiser over (w, b) of the mean log loss of
                softmax(w * z + b) plus (penalty / 2)(|w - 1|^2 + |b|^2),
                penalty 1e-4, analytic gradient, started at w = 1, b = 0.
                Recorded: w, b, the gradient norm at the solution and the
                smallest eigenvalue of the analytic Hessian there.
  *_log_loss    sklearn log_loss of the fitted maps' predictions on the
                calibration rows.
"""

import json
import os
import sys

import numpy as np
import scipy
import sklearn
from scipy.optimize import minimize
from scipy.special import logsumexp, softmax
from sklearn.metrics import log_loss

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from fixtures_ece import ece_mass, ece_width  # noqa: E402

OUT = os.path.join("tests", "fixtures", "multiclass", "reference.json")
PENALTY = 1e-4
BINS = 10

GENERATOR = {
    "script": "scripts/fixtures_multiclass.py",
    "python": sys.version.split()[0],
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "scikit-learn": sklearn.__version__,
}


def make_data(rng, n, scales, offsets):
    k = len(scales)
    lat = rng.standard_normal((n, k))
    q = softmax(lat, axis=1)
    u = rng.random(n)
    y = np.minimum((np.cumsum(q, axis=1) < u[:, None]).sum(axis=1), k - 1)
    z = lat * np.asarray(scales) + np.asarray(offsets)
    return z, y


def check_off_edges(v):
    near = np.abs(v * BINS - np.round(v * BINS)) < 1e-9
    assert not near.any(), v[near]


def eces(p, y):
    k = p.shape[1]
    conf = p.max(axis=1)
    hit = (p.argmax(axis=1) == y).astype(float)
    check_off_edges(conf)
    check_off_edges(p.ravel())
    out = {
        "top_label_width": ece_width(conf, hit, BINS)[0],
        "top_label_mass": ece_mass(conf, hit, BINS),
    }
    cw = [ece_width(p[:, c], (y == c).astype(float), BINS)[0] for c in range(k)]
    cm = [ece_mass(p[:, c], (y == c).astype(float), BINS) for c in range(k)]
    out["classwise_width"] = float(np.mean(cw))
    out["classwise_mass"] = float(np.mean(cm))
    return out


def fit_temperature(z, y):
    n = len(y)
    rows = np.arange(n)

    def f(u):
        a = z / np.exp(u[0])
        return float(np.mean(logsumexp(a, axis=1) - a[rows, y]))

    def grad(u):
        t = np.exp(u[0])
        p = softmax(z / t, axis=1)
        # d/du of (lse(z/T) - z_y/T) with T = e^u: -(E_p z - z_y) / T.
        return np.array([-np.mean((p * z).sum(axis=1) - z[rows, y]) / t])

    res = minimize(f, np.array([0.0]), jac=grad, method="BFGS",
                   options={"gtol": 1e-11, "maxiter": 10000})
    t = float(np.exp(res.x[0]))
    p = softmax(z / t, axis=1)
    mean = (p * z).sum(axis=1)
    var = (p * (z - mean[:, None]) ** 2).sum(axis=1)
    g = float(grad(res.x)[0])
    curv = float(np.mean(var) / t ** 2)
    assert abs(g) < 1e-9, (res.message, g)
    return t, g, curv, p


def vector_parts(theta, z, y, k):
    n = len(y)
    w, b = theta[:k], theta[k:]
    a = z * w + b
    p = softmax(a, axis=1)
    e = np.zeros_like(p)
    e[np.arange(n), y] = 1.0
    loss = float(np.mean(logsumexp(a, axis=1) - a[np.arange(n), y])
                 + 0.5 * PENALTY * (np.sum((w - 1.0) ** 2) + np.sum(b ** 2)))
    d = p - e
    grad = np.concatenate([np.mean(z * d, axis=0), np.mean(d, axis=0)])
    grad += PENALTY * np.concatenate([w - 1.0, b])
    return loss, grad, p


def vector_hessian(theta, z, y, k):
    n = len(y)
    w, b = theta[:k], theta[k:]
    p = softmax(z * w + b, axis=1)
    h = np.zeros((2 * k, 2 * k))
    for i in range(n):
        s = np.diag(p[i]) - np.outer(p[i], p[i])
        jac = np.hstack([np.diag(z[i]), np.eye(k)])
        h += jac.T @ s @ jac
    return h / n + PENALTY * np.eye(2 * k)


def fit_vector(z, y):
    k = z.shape[1]
    theta0 = np.concatenate([np.ones(k), np.zeros(k)])
    res = minimize(lambda t: vector_parts(t, z, y, k)[0], theta0,
                   jac=lambda t: vector_parts(t, z, y, k)[1], method="BFGS",
                   options={"gtol": 1e-11, "maxiter": 100000})
    loss, grad, p = vector_parts(res.x, z, y, k)
    gnorm = float(np.linalg.norm(grad))
    mu = float(np.linalg.eigvalsh(vector_hessian(res.x, z, y, k)).min())
    assert gnorm < 1e-8, (res.message, gnorm)
    return res.x[:k], res.x[k:], loss, gnorm, mu, p


def make_case(name, rng, n, scales, offsets):
    z, y = make_data(rng, n, scales, offsets)
    k = z.shape[1]
    labels = list(range(k))
    p = softmax(z, axis=1)
    assert p[np.arange(n), y].min() > 1e-6, "the log-loss clip would matter"
    brier = float(np.mean(((p - np.eye(k)[y]) ** 2).sum(axis=1)))
    t, tg, tcurv, pt = fit_temperature(z, y)
    w, b, vloss, vg, vmu, pv = fit_vector(z, y)
    print(f"{name}: n = {n}, K = {k}, class counts {np.bincount(y, minlength=k).tolist()}, "
          f"T = {t:.6f}, w = {np.round(w, 4).tolist()}, |grad| = {vg:.1e}, mu = {vmu:.1e}")
    return {
        "name": name,
        "how": f"l ~ N(0, 1) in {k} columns, y ~ softmax(l), z = s * l + c with "
               f"s = {list(scales)}, c = {list(offsets)}",
        "classes": k,
        "logits": [float(v) for v in z.ravel()],
        "labels": [int(v) for v in y],
        "probabilities": [float(v) for v in p.ravel()],
        "bins": BINS,
        "log_loss": float(log_loss(y, p, labels=labels)),
        "brier": brier,
        "ece": eces(p, y),
        "temperature": {
            "t": t, "grad_ln_t": tg, "curvature_ln_t": tcurv,
            "log_loss": float(log_loss(y, pt, labels=labels)),
        },
        "vector": {
            "penalty": PENALTY, "w": [float(v) for v in w], "b": [float(v) for v in b],
            "objective": vloss, "grad_norm": vg, "min_hessian_eigenvalue": vmu,
            "log_loss": float(log_loss(y, pv, labels=labels)),
        },
    }


def main():
    for key, v in GENERATOR.items():
        print(f"{key}: {v}")
    rng = np.random.default_rng(20170806)
    cases = [
        make_case("k3-n240", rng, 240, (2.5, 2.5, 2.5), (0.0, 0.0, 0.0)),
        make_case("k3-n300-biased", rng, 300, (1.5, 2.5, 3.5), (0.4, 0.0, -0.6)),
        make_case("k4-n400", rng, 400, (3.0, 2.0, 2.5, 1.2), (0.3, -0.2, 0.0, 0.5)),
    ]
    doc = {
        "generator": GENERATOR,
        "note": "multiclass log loss (scikit-learn), Brier score (numpy), top-label and "
                "classwise ECE (numpy), temperature and vector scaling fitted by "
                "scipy.optimize.minimize (BFGS)",
        "cases": cases,
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
