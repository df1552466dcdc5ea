#!/usr/bin/env python3
"""Reference fixtures for the base models (logistic regression, Gaussian naive Bayes).

How the fixtures are made:
  * A synthetic two-class dataset (numpy, seed 20261201): three numeric features
    with class-dependent means and a categorical feature with 4 levels whose
    distribution depends on the class; 600 rows, the first 400 marked as training
    rows. Written to tests/fixtures/models/synthetic.csv.
  * The design the Rust code builds is rebuilt here: numeric columns as they are,
    the categorical column one-hot encoded (levels 1..3 with level 0 as
    reference for logistic regression, all 4 levels for naive Bayes).
    For logistic regression each design column is standardised with the
    training rows' mean and population standard deviation (ddof = 0).
  * scikit-learn LogisticRegression(C = 1/lambda, L2 penalty, intercept not
    penalised, solver "lbfgs", tol 1e-12) for lambda in {1, 0.1}, and statsmodels
    Logit (Newton, unpenalised) for lambda = 0: intercept, coefficients and
    test-row probabilities.
  * scikit-learn GaussianNB(var_smoothing = 1e-9): class means, variances,
    priors, epsilon and test-row probabilities.
  Library versions are written into the JSON under "generated_by".

Run from the repository root:  python3 scripts/fixtures_models.py
"""
import json
import platform
import sys
from pathlib import Path

import numpy as np
import scipy
import sklearn
import statsmodels
import statsmodels.api as sm
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB

OUT = Path("tests/fixtures/models")
N, N_TRAIN, LEVELS = 600, 400, 4


def make_data():
    rng = np.random.default_rng(20261201)
    y = rng.random(N) < 0.4
    x0 = rng.normal(0.0, 1.0, N) + 1.0 * y
    x1 = rng.normal(2.0, 3.0, N) - 1.5 * y
    x2 = 0.5 * x0 + rng.normal(0.0, 1.0, N)  # correlated with x0
    p_level = np.where(y[:, None], [0.1, 0.2, 0.3, 0.4], [0.4, 0.3, 0.2, 0.1])
    u = rng.random(N)
    c = (u[:, None] > np.cumsum(p_level, axis=1)).sum(axis=1)
    return np.column_stack([x0, x1, x2]), c.astype(int), y


def design(num, cat, reference):
    first = 1 if reference else 0
    dummies = [(cat == l).astype(float) for l in range(first, LEVELS)]
    return np.column_stack([num] + dummies)


def main():
    num, cat, y = make_data()
    OUT.mkdir(parents=True, exist_ok=True)
    with open(OUT / "synthetic.csv", "w") as f:
        f.write("x0,x1,x2,c,label,train\n")
        for i in range(N):
            f.write(
                f"{float(num[i, 0])!r},{float(num[i, 1])!r},{float(num[i, 2])!r},{cat[i]},{int(y[i])},{int(i < N_TRAIN)}\n"
            )
    tr, te = slice(0, N_TRAIN), slice(N_TRAIN, N)

    # Logistic regression on the standardised reference-coded design.
    X = design(num, cat, reference=True)
    mean = X[tr].mean(axis=0)
    sd = X[tr].std(axis=0)  # ddof = 0
    Z = (X - mean) / sd
    logistic = []
    for lam in [1.0, 0.1]:
        m = LogisticRegression(C=1.0 / lam, solver="lbfgs", tol=1e-12, max_iter=100000)
        m.fit(Z[tr], y[tr])
        logistic.append(
            {
                "l2": lam,
                "source": f"scikit-learn LogisticRegression(C={1.0 / lam})",
                "intercept": float(m.intercept_[0]),
                "coef": [float(v) for v in m.coef_[0]],
                "test_proba": [float(v) for v in m.predict_proba(Z[te])[:, 1]],
            }
        )
    res = sm.Logit(y[tr].astype(float), sm.add_constant(Z[tr])).fit(
        method="newton", tol=1e-12, maxiter=200, disp=0
    )
    logistic.append(
        {
            "l2": 0.0,
            "source": "statsmodels Logit (Newton, unpenalised)",
            "intercept": float(res.params[0]),
            "coef": [float(v) for v in res.params[1:]],
            "test_proba": [float(v) for v in res.predict(sm.add_constant(Z[te]))],
        }
    )

    # Gaussian naive Bayes on the full one-hot design.
    Xf = design(num, cat, reference=False)
    nb = GaussianNB(var_smoothing=1e-9).fit(Xf[tr], y[tr])
    assert list(nb.classes_) == [False, True]
    naive_bayes = {
        "var_smoothing": 1e-9,
        "source": "scikit-learn GaussianNB(var_smoothing=1e-9)",
        "epsilon": float(nb.epsilon_),
        "class_prior": [float(v) for v in nb.class_prior_],
        "theta": [[float(v) for v in row] for row in nb.theta_],
        "var": [[float(v) for v in row] for row in nb.var_],
        "test_proba": [float(v) for v in nb.predict_proba(Xf[te])[:, 1]],
    }

    out = {
        "generated_by": {
            "script": "scripts/fixtures_models.py",
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "rows": N,
        "train_rows": N_TRAIN,
        "logistic": logistic,
        "naive_bayes": naive_bayes,
    }
    with open(OUT / "reference.json", "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    print("wrote", OUT / "synthetic.csv", OUT / "reference.json", file=sys.stderr)


if __name__ == "__main__":
    main()
