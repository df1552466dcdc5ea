#!/usr/bin/env python3
"""Reference values for the metrics at a threshold, threshold_cost and net_benefit
(src/metrics/threshold.rs), read by tests/metrics_reference.rs.

Writes tests/fixtures/metrics/decision.json: one seeded test set (predictions
p, labels y) and, at each of three thresholds t, the confusion matrix from
scikit-learn's sklearn.metrics.confusion_matrix of y against the decision
[p >= t], and both metrics computed from its four counts:

  threshold_cost = 2 * ((1 - t) * FN + t * FP) / n
                   (Hernandez-Orallo, Flach & Ferri 2012, JMLR 13: cost t per
                   false positive, 1 - t per false negative, times 2)
  net_benefit    = TP / n - FP / n * t / (1 - t)
                   (Vickers & Elkin 2006, Medical Decision Making 26)

The counts come from the library, not from a row loop, so the fixture checks
the crate's per-row terms against an independent tally. Some predictions are
set exactly to each threshold, so the rule "acted on when p >= t" is checked at
the boundary. Library versions are recorded in the fixture's "versions" field.
Run:

    python3 -m venv venv && venv/bin/pip install numpy scipy scikit-learn
    venv/bin/python scripts/fixtures_decision.py
"""
import json
import os
import platform

import numpy as np
import scipy
import sklearn
from scipy.special import expit, logit
from sklearn.metrics import confusion_matrix

OUT = os.path.join(os.path.dirname(__file__), "..", "tests", "fixtures", "metrics", "decision.json")

THRESHOLDS = [0.1, 0.35, 0.75]


def main():
    rng = np.random.default_rng(20260514)
    n = 500
    q = rng.beta(1.2, 3.0, n)
    y = rng.random(n) < q
    # An over-confident model: the log-odds stretched and shifted.
    p = expit(1.6 * logit(q) - 0.3)
    # Predictions exactly on each threshold (acted on), and exact 0 and 1.
    on = rng.choice(n, size=6 * len(THRESHOLDS) + 4, replace=False)
    for k, t in enumerate(THRESHOLDS):
        p[on[6 * k: 6 * k + 6]] = t
    p[on[-4:-2]] = 0.0
    p[on[-2:]] = 1.0

    rows = []
    for t in THRESHOLDS:
        acted = (p >= t).astype(int)
        tn, fp, fn, tp = confusion_matrix(y.astype(int), acted, labels=[0, 1]).ravel()
        rows.append({
            "t": t,
            "tn": int(tn), "fp": int(fp), "fn": int(fn), "tp": int(tp),
            "threshold_cost": float(2.0 * ((1.0 - t) * fn + t * fp) / n),
            "net_benefit": float(tp / n - fp / n * t / (1.0 - t)),
        })

    doc = {
        "generated_by": "scripts/fixtures_decision.py",
        "how": "q ~ Beta(1.2, 3), y ~ Bernoulli(q), p = expit(1.6 logit q - 0.3), "
               "6 rows set to each threshold, 2 rows to 0 and 2 to 1; n = 500, seed 20260514",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
        },
        "p": [float(v) for v in p],
        "y": [int(v) for v in y],
        "thresholds": rows,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
