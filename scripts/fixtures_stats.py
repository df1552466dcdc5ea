#!/usr/bin/env python3
"""Reference values for plumbline's statistics (src/stats), from scipy and statsmodels.

Writes tests/fixtures/stats/reference.json, read by tests/stats_reference.rs.
Run from the repository root:  python3 scripts/fixtures_stats.py
The library versions used are stored in the fixture under "generated_with".
Inputs are drawn from numpy's default_rng with fixed seeds, so a re-run with the
same library versions reproduces the file.
"""
import json
import platform

import numpy as np
import scipy
import scipy.stats as st
import statsmodels
from statsmodels.stats.multitest import multipletests

rng = np.random.default_rng(20060107)
out = {
    "generated_with": {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "statsmodels": statsmodels.__version__,
        "script": "scripts/fixtures_stats.py",
    }
}

# Paired t intervals: scipy.stats.ttest_rel on (a, b) and t.interval around the mean difference.
paired = []
for n, conf in [(10, 0.95), (30, 0.95), (7, 0.90)]:
    a = rng.normal(0.30, 0.02, n)
    b = a + rng.normal(0.004, 0.01, n)
    d = a - b
    tt = st.ttest_rel(a, b)
    sem = st.sem(d)
    lo, hi = st.t.interval(conf, n - 1, loc=d.mean(), scale=sem)
    paired.append({"diffs": d.tolist(), "confidence": conf, "t": float(tt.statistic),
                   "p": float(tt.pvalue), "low": float(lo), "high": float(hi), "se": float(sem)})
out["paired_t"] = paired

# Student t quantiles, including fractional degrees of freedom (Satterthwaite df).
out["t_quantiles"] = [{"p": p, "df": df, "q": float(st.t.ppf(p, df))}
                      for p, df in [(0.975, 9), (0.975, 29), (0.95, 4.5), (0.975, 17.3), (0.995, 2.2)]]

# Wilcoxon signed-rank.
wil = []
d = rng.normal(0.3, 1.0, 12)  # no ties, no zeros: exact
r = st.wilcoxon(d, method="exact")
wil.append({"d": d.tolist(), "method": "exact", "t": float(r.statistic), "p": float(r.pvalue)})
d = rng.normal(0.2, 1.0, 60)  # N > 50: normal approximation
r = st.wilcoxon(d, method="approx", correction=False)
wil.append({"d": d.tolist(), "method": "normal", "t": float(r.statistic), "p": float(r.pvalue)})
d = np.round(rng.normal(0.5, 1.5, 30))  # ties and zeros: zsplit, normal approximation
r = st.wilcoxon(d, zero_method="zsplit", method="approx", correction=False)
wil.append({"d": d.tolist(), "method": "normal", "t": float(r.statistic), "p": float(r.pvalue)})
out["wilcoxon"] = wil

# Friedman chi-square (scipy applies the tie correction).
fr = []
for n, k, ties in [(12, 4, False), (20, 5, True), (8, 3, False)]:
    x = rng.normal(0, 1, (n, k)) + np.linspace(0, 0.8, k)
    if ties:
        x = np.round(x)
    r = st.friedmanchisquare(*[x[:, j] for j in range(k)])
    fr.append({"values": x.tolist(), "chi2": float(r.statistic), "p": float(r.pvalue)})
out["friedman"] = fr

# Holm adjustment.
p = [0.01, 0.04, 0.03, 0.20, 0.001]
out["holm"] = {"p": p, "adjusted": multipletests(p, method="holm")[1].tolist()}

# Nemenyi q_alpha = studentized range quantile (infinite df) / sqrt(2).
out["nemenyi_q"] = [{"k": k, "alpha": a,
                     "q": float(st.studentized_range.ppf(1 - a, k, np.inf) / np.sqrt(2))}
                    for a in (0.05, 0.10) for k in range(2, 11)]

# Nemenyi q_alpha where it is computed rather than read from Demsar's Table 5(a):
# alpha = 0.01, and more methods than the table's 10.
out["nemenyi_q_computed"] = [{"k": k, "alpha": a,
                              "q": float(st.studentized_range.ppf(1 - a, k, np.inf) / np.sqrt(2))}
                             for a, ks in ((0.01, range(2, 11)), (0.05, (11, 12, 15, 20)), (0.10, (12, 20)))
                             for k in ks]


# Wilcoxon signed-rank critical values (the printed tables, e.g. Siegel 1956,
# Table G): the largest T = min(R+, R-) whose exact two-sided p-value from
# scipy.stats.wilcoxon(method="exact") is <= alpha, or None when even T = 0 is
# not. Each T is realised by the differences +-1, ..., +-n whose negative ranks
# sum to T (chosen greedily from the largest rank).
def signed_ranks(n, t):
    d = np.arange(1, n + 1, dtype=float)
    rest = t
    for r in range(n, 0, -1):
        if r <= rest:
            d[r - 1] = -r
            rest -= r
    assert rest == 0
    return d


def wilcoxon_critical(n, alpha):
    best = None
    for t in range(n * (n + 1) // 4 + 1):
        r = st.wilcoxon(signed_ranks(n, t), method="exact")
        assert r.statistic == t
        if r.pvalue <= alpha:
            best = t
        else:
            break
    return best


out["wilcoxon_critical"] = [{"n": n, "alpha": a, "t": wilcoxon_critical(n, a)}
                            for a in (0.05, 0.01) for n in range(5, 31)]

with open("tests/fixtures/stats/reference.json", "w") as f:
    json.dump(out, f, indent=1)
print("wrote tests/fixtures/stats/reference.json")
