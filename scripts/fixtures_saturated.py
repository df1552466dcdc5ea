#!/usr/bin/env python3
"""Reference fits of Platt scaling and beta calibration on saturated samples
(read by tests/methods_saturated.rs).

The samples are calibration samples of the default suite whose naive-Bayes
scores are nearly all within 1e-10 of 0 or 1. Each CSV under
tests/fixtures/methods/saturated/ was written, from the repository root, by

    cargo run --release --example export_unit_sample -- \
        suites/open-uci.toml TASK SIZE REPEAT OUT.csv

for (TASK, SIZE, REPEAT) = (spambase.naive-bayes, 50, 3),
(satimage-4.naive-bayes, 100, 6) and (coil2000.naive-bayes, 200, 8).

How the references are made: run from the repository root with
    pip install numpy scipy statsmodels
    python3 scripts/fixtures_saturated.py
It writes tests/fixtures/methods/saturated/reference.json with a "generator"
header (script and library versions).

Reference computation: statsmodels Logit (unpenalised maximum likelihood,
Newton, tol 1e-14) of y on [1, x], with x = s for Platt scaling and
x = (ln s', -ln(1 - s')), s' = clip(s, 1e-12, 1 - 1e-12), for beta calibration
(LOGIT_EPS of the crate). On these samples the plain design is so badly
conditioned that statsmodels stops unconverged (almost all weight
p(1 - p) sits on rows with nearly equal x). Maximum likelihood is unchanged by
an affine change of each feature, so the fit is repeated on
x' = (x - m) / h, with m and h the weighted mean and standard deviation of x
under the weights p(1 - p) of the previous fit, until statsmodels reports
convergence; the coefficients are mapped back to the raw x. The negative
log-likelihood at the optimum is recorded too.
Beta cases are only written when both fitted coefficients are >= 0 (no refit)
and the sample is not separable, so the crate's answer is the plain maximum
likelihood fit.
"""

import csv
import json
import os
import sys
import warnings

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy.special import expit

DIR = os.path.join("tests", "fixtures", "methods", "saturated")
EPS = 1e-12
SAMPLES = ["spambase-nb-50-3.csv", "satimage-4-nb-100-6.csv", "coil2000-nb-200-8.csv"]

GENERATOR = {
    "script": "scripts/fixtures_saturated.py",
    "python": sys.version.split()[0],
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
}


def load(name):
    with open(os.path.join(DIR, name)) as f:
        rows = list(csv.DictReader(f))
    return (np.array([float(r["score"]) for r in rows]), np.array([int(r["label"]) for r in rows]))


def nll(X, y, coef, intercept):
    z = X @ coef + intercept
    return float(np.sum(np.logaddexp(0.0, z) - y * z))


def fit(X, y):
    """Unpenalised logistic MLE of y on [1, X], refitted on affinely rescaled
    features until statsmodels converges. Returns (coef, intercept, rounds)."""
    m = X.mean(axis=0)
    h = X.std(axis=0)
    start = None
    for rounds in range(1, 60):
        Xs = (X - m) / h
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = sm.Logit(y, sm.add_constant(Xs, has_constant="add")).fit(
                method="newton", maxiter=500, tol=1e-14, disp=0, start_params=start
            )
        b = np.asarray(res.params)
        coef = b[1:] / h
        intercept = b[0] - np.sum(b[1:] * m / h)
        if res.mle_retvals["converged"]:
            return coef, intercept, rounds
        z = X @ coef + intercept
        p = expit(z)
        w = p * (1.0 - p) + 1e-300
        m_new = (w[:, None] * X).sum(axis=0) / w.sum()
        h_new = np.sqrt((w[:, None] * (X - m_new) ** 2).sum(axis=0) / w.sum())
        h_new = np.where(h_new > 0, h_new, h)
        # start of the next round: the same model in the new coordinates
        slope = coef * h_new
        start = np.concatenate([[intercept + np.sum(coef * m_new)], slope])
        m, h = m_new, h_new
    raise SystemExit("statsmodels did not converge")


def separable_runs(s, y, cuts):
    """The crate's rule (beta.rs): classes of tied groups along sorted scores
    form at most cuts+1 runs A|B(|A), mixed groups only at a crossing."""
    order = sorted(set(s))
    classes = []
    for v in order:
        lab = set(y[s == v])
        classes.append(0 if len(lab) == 2 else (1 if 1 in lab else -1))
    for a in (1, -1):
        region, ok = 0, True
        for c in classes:
            want = a if region % 2 == 0 else -a
            if c == want:
                continue
            region += 1
            if region > cuts:
                ok = False
                break
        if ok:
            return True
    return False


def main():
    cases = []
    for name in SAMPLES:
        s, y = load(name)
        sc = np.clip(s, EPS, 1 - EPS)
        Xp = s.reshape(-1, 1)
        coef, b, rounds = fit(Xp, y)
        cases.append({
            "sample": name, "method": "platt", "a": float(coef[0]), "b": float(b),
            "nll": nll(Xp, y, coef, b), "rounds": rounds,
        })
        Xb = np.column_stack([np.log(sc), -np.log1p(-sc)])
        if len(set(sc)) >= 3 and not separable_runs(sc, y, 2):
            coef, c, rounds = fit(Xb, y)
            if coef[0] >= 0 and coef[1] >= 0:
                cases.append({
                    "sample": name, "method": "beta", "a": float(coef[0]), "b": float(coef[1]),
                    "c": float(c), "nll": nll(Xb, y, coef, c), "rounds": rounds,
                })
            else:
                print(f"{name}: beta needs a refit (a={coef[0]}, b={coef[1]}); not written")
    for c in cases:
        print(c)
    path = os.path.join(DIR, "reference.json")
    with open(path, "w") as f:
        json.dump({"generator": GENERATOR, "cases": cases}, f, indent=1)
        f.write("\n")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
