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
  matrix        the same minimiser over (W, b) (K^2 + K parameters) of the
                mean log loss of softmax(z W^T + b) plus
                (penalty / 2)(|W - I|_F^2 + |b|^2), penalty 1e-4, started at
                W = I, b = 0, then, when BFGS stops above a gradient norm of
                1e-11, polished by solving gradient = 0 with
                scipy.optimize.root ("hybr", analytic Hessian as Jacobian),
                keeping whichever point has the smaller gradient. Recorded: W (row-major), b, the objective, the
                gradient norm and the smallest Hessian eigenvalue.
  dirichlet     the same for the map softmax(ln(q) W^T + b) of the given
                probabilities q = softmax(z), with ln q clipped below at
                ln(1e-12), and the ODIR penalty at FIXED strengths
                lambda = mu = 1e-2:
                  lambda * sum_{j != k} W_jk^2 / (K (K - 1))
                  + mu * sum_k b_k^2 / K + kappa * sum_k (W_kk - 1)^2 / K,
                kappa = 1e-6 (plumbline's diagonal guard).
  *_log_loss    sklearn log_loss of the fitted maps' predictions on the
                calibration rows.
"""

import json
import os
import sys

import numpy as np
import scipy
import sklearn
from scipy.optimize import minimize, root
from scipy.special import logsumexp, softmax
from sklearn.metrics import log_loss

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from fixtures_ece import ece_mass, ece_width  # noqa: E402

OUT = os.path.join("tests", "fixtures", "multiclass", "reference.json")
PENALTY = 1e-4
ODIR_LAMBDA = 1e-2
ODIR_MU = 1e-2
DIAGONAL_GUARD = 1e-6
LOG_CLIP = 1e-12
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


def affine_parts(theta, x, y, k, pen):
    n = len(y)
    m = theta.reshape(k, k + 1)
    w, b = m[:, :k], m[:, k]
    a = x @ w.T + b
    p = softmax(a, axis=1)
    e = np.zeros_like(p)
    e[np.arange(n), y] = 1.0
    value, grad_w, grad_b = pen(w, b)
    loss = float(np.mean(logsumexp(a, axis=1) - a[np.arange(n), y]) + value)
    d = p - e
    gw = d.T @ x / n + grad_w
    gb = d.mean(axis=0) + grad_b
    grad = np.hstack([gw, gb[:, None]]).ravel()
    return loss, grad, p


def affine_hessian(theta, x, y, k, pen_hess):
    n = len(y)
    m = theta.reshape(k, k + 1)
    p = softmax(x @ m[:, :k].T + m[:, k], axis=1)
    h = np.zeros((k * (k + 1), k * (k + 1)))
    for i in range(n):
        s = np.diag(p[i]) - np.outer(p[i], p[i])
        xt = np.append(x[i], 1.0)
        h += np.kron(s, np.outer(xt, xt))
    return h / n + np.diag(pen_hess)


def fit_affine(x, y, pen, pen_hess):
    k = x.shape[1]
    theta0 = np.hstack([np.eye(k), np.zeros((k, 1))]).ravel()
    f = lambda t: affine_parts(t, x, y, k, pen)[0]  # noqa: E731
    g = lambda t: affine_parts(t, x, y, k, pen)[1]  # noqa: E731
    res = minimize(f, theta0, jac=g, method="BFGS",
                   options={"gtol": 1e-11, "maxiter": 100000})
    theta = res.x
    hess = lambda t: affine_hessian(t, x, y, k, pen_hess)  # noqa: E731
    if np.linalg.norm(g(theta)) > 1e-11:
        # Near the optimum J changes by about |grad|^2 / mu, below the
        # rounding of J, so a minimiser's line search stalls: polish by
        # solving grad = 0 (scipy's root finder, analytic Jacobian = Hessian)
        # and keep the point with the smaller gradient.
        sol = root(g, theta, jac=hess, method="hybr", options={"xtol": 1e-15})
        if np.linalg.norm(g(sol.x)) < np.linalg.norm(g(theta)):
            theta = sol.x
    loss, grad, p = affine_parts(theta, x, y, k, pen)
    gnorm = float(np.linalg.norm(grad))
    mu = float(np.linalg.eigvalsh(affine_hessian(theta, x, y, k, pen_hess)).min())
    assert gnorm < 1e-9, (res.message, gnorm)
    m = theta.reshape(k, k + 1)
    return m[:, :k], m[:, k], loss, gnorm, mu, p


def matrix_penalty(k):
    def pen(w, b):
        d = w - np.eye(k)
        value = 0.5 * PENALTY * (np.sum(d ** 2) + np.sum(b ** 2))
        return value, PENALTY * d, PENALTY * b
    return pen, np.full(k * (k + 1), PENALTY)


def odir_penalty(k):
    off = 1.0 - np.eye(k)

    def pen(w, b):
        dg = np.diag(w) - 1.0
        value = (ODIR_LAMBDA * np.sum((w * off) ** 2) / (k * (k - 1))
                 + ODIR_MU * np.sum(b ** 2) / k + DIAGONAL_GUARD * np.sum(dg ** 2) / k)
        gw = 2.0 * ODIR_LAMBDA * w * off / (k * (k - 1)) + np.diag(2.0 * DIAGONAL_GUARD * dg / k)
        return value, gw, 2.0 * ODIR_MU * b / k
    hw = 2.0 * ODIR_LAMBDA * off / (k * (k - 1)) + np.eye(k) * 2.0 * DIAGONAL_GUARD / k
    hb = np.full((k, 1), 2.0 * ODIR_MU / k)
    return pen, np.hstack([hw, hb]).ravel()


def affine_record(fitted, y, labels, extra):
    w, b, loss, gnorm, mu, p = fitted
    out = dict(extra)
    out.update({
        "w": [float(v) for v in w.ravel()], "b": [float(v) for v in b],
        "objective": loss, "grad_norm": gnorm, "min_hessian_eigenvalue": mu,
        "log_loss": float(log_loss(y, p, labels=labels)),
    })
    return out


def make_case(name, rng, n, scales, offsets):
    z, y = make_data(rng, n, scales, offsets)
    k = z.shape[1]
    labels = list(range(k))
    p = softmax(z, axis=1)
    assert p[np.arange(n), y].min() > 1e-6, "the log-loss clip would matter"
    brier = float(np.mean(((p - np.eye(k)[y]) ** 2).sum(axis=1)))
    t, tg, tcurv, pt = fit_temperature(z, y)
    w, b, vloss, vg, vmu, pv = fit_vector(z, y)
    mpen, mhess = matrix_penalty(k)
    mfit = fit_affine(z, y, mpen, mhess)
    assert p.min() > LOG_CLIP
    dpen, dhess = odir_penalty(k)
    dfit = fit_affine(np.log(np.maximum(p, LOG_CLIP)), y, dpen, dhess)
    print(f"  matrix |grad| = {mfit[3]:.1e}, mu = {mfit[4]:.1e}; "
          f"dirichlet |grad| = {dfit[3]:.1e}, mu = {dfit[4]:.1e}")
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
        "matrix": affine_record(mfit, y, labels, {"penalty": PENALTY}),
        "dirichlet": affine_record(dfit, y, labels, {
            "lambda": ODIR_LAMBDA, "mu": ODIR_MU, "diagonal_guard": DIAGONAL_GUARD,
            "log_clip": LOG_CLIP}),
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
                "classwise ECE (numpy), temperature, vector and matrix scaling and "
                "Dirichlet calibration (ODIR, fixed strengths) fitted by "
                "scipy.optimize.minimize (BFGS, polished by scipy.optimize.root on the gradient)",
        "cases": cases,
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
