#!/usr/bin/env python3
"""Reference values for the Bayesian signed-rank test (src/stats/bayes.rs), from baycomp.

Writes tests/fixtures/bayes_signed_rank.json, read by tests/stats_bayes.rs.
Needs baycomp (Benavoli, Corani & Demsar's package for Bayesian comparisons of
classifiers), a general-purpose statistics library:

    pip install baycomp==1.0.3
    python3 scripts/fixtures_bayes.py        # from the repository root

Calls baycomp.SignedRankTest(x, y, rope, prior=0.5, nsamples=N, random_state=S):
baycomp takes the differences as y - x, so x = 0 and y = d give the
differences d; its probs() is (p_left, p_rope, p_right), the share of
posterior samples in which each region is the most probable. With d = A - B of
a loss, left means A is better. The posterior means of the three region
probabilities (the sample's column means) are stored as well. The library
versions used are stored under "generated_with".
"""
import json
import platform

import baycomp
import numpy as np
from importlib.metadata import version

NSAMPLES = 50000
PRIOR = 0.5

rng = np.random.default_rng(20170101)
cases = [
    # n = 12 (one per dataset of the default suite), mixed signs, mostly beyond the rope.
    ("n12_mixed", rng.normal(-0.02, 0.03, 12), 0.01),
    # Ties and zeros: repeated values, exact zeros, values exactly on the rope boundary.
    ("ties_and_zeros", np.array([0.0, 0.0, 0.01, 0.01, -0.01, 0.02, 0.02, 0.0, -0.03, 0.01]), 0.01),
    # Small n, differences mostly inside the rope.
    ("n5_inside", np.array([0.002, -0.004, 0.001, 0.003, -0.001]), 0.005),
    # Clearly better (negative differences far beyond the rope).
    ("n8_better", rng.normal(-0.5, 0.1, 8), 0.05),
    # No rope: two regions only.
    ("n12_no_rope", rng.normal(0.01, 0.03, 12), 0.0),
]

out = {
    "generated_with": {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "baycomp": version("baycomp"),
        "call": "baycomp.SignedRankTest(np.zeros(n), d, rope, prior=0.5, nsamples=50000, random_state=seed)",
        "script": "scripts/fixtures_bayes.py",
    },
    "prior": PRIOR,
    "nsamples": NSAMPLES,
    "cases": [],
}
for i, (name, d, rope) in enumerate(cases):
    d = np.asarray(d, dtype=float)
    post = baycomp.SignedRankTest(np.zeros(len(d)), d, rope, prior=PRIOR,
                                  nsamples=NSAMPLES, random_state=1000 + i)
    if rope > 0:
        pl, pe, pr = post.probs()
    else:
        pl, pr = post.probs(with_rope=False)
        pe = 0.0
    mean = post.sample.mean(axis=0)
    out["cases"].append({
        "name": name,
        "diffs": d.tolist(),
        "rope": rope,
        "p_left": float(pl),
        "p_rope": float(pe),
        "p_right": float(pr),
        "mean_theta": [float(x) for x in mean],
    })

with open("tests/fixtures/bayes_signed_rank.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print("wrote tests/fixtures/bayes_signed_rank.json")
