#!/usr/bin/env python3
"""Coverage of alternative reservoir-term rules, computed offline from the raw
interval inputs that the coverage study writes with `--raw STEM`
(`cargo bench --bench coverage -- --raw STEM ...`: STEM.csv indexes one record
per replicate and cell, STEM.bin holds its per-repeat differences d_r, the
repeats × 20 test-batch mean differences and the calibration positives).

Usage: python3 scripts/coverage_rules.py STEM RESERVOIR > OUT.txt

For every rule below it recomputes the default interval (`decomposed-skew`:
the decomposition, Satterthwaite degrees of freedom with kurtosis-adjusted
mean squares and Hall's skewness correction, exactly as src/stats/paired.rs
does; the rule `extreme` reproduces the study's own table bit for bit on the
same inputs) with the rule's reservoir term, and prints the coverage per
population and metric, split into cells whose calibration samples held on
average fewer than 10 rows of the rarer class ("rare") and the rest.

Rules (ρ = n/M; s² the sample variance of d_r; degree k means the term
s² ρ^k/(1 − ρ^k)):
  extreme       k = 1 when either method made an extreme log-loss prediction,
                else 2 (the rule before rare classes were treated);
  rare          k = 1 also when the cell is rare (the current rule);
  stationary    k = 1 also when either method's fit does not minimise the
                evaluated loss on its sample (only Platt, beta and temperature
                minimise the log loss; identity has no fit);
  stationary+rare, k1.5-nonstationary+rare: the two combined, and a degree of
                1.5 for non-stationary pairs;
  composition+rare  the share of s² that the calibration sample's positive
                count explains (adjusted R² of d_r on it across the repeats,
                floored at 0) takes degree 1, the rest degree 2; k = 1 for
                extreme and rare cells as in `rare`. A first-order reservoir
                effect is a sum over the sample's rows; the part of it that
                moves with the sample's label mix shows up as this
                regression across repeats.
Needs numpy and scipy.
"""
import csv
import sys

import numpy as np
from scipy import stats

MLE = {"platt", "beta", "temperature"}
RARE_ROWS = 10


def stationary(method, metric):
    return method == "identity" or (metric == "log_loss" and method in MLE)


def exkurt(x):
    m = x.mean()
    m2 = ((x - m) ** 2).mean()
    m4 = ((x - m) ** 4).mean()
    return max(m4 / (m2 * m2) - 3.0, 0.0) if m2 > 0 else 0.0


def kdf(n, k):
    return 2.0 / (2.0 / (n - 1) + k / n)


def hall_inv(x, k):
    a = k / 3.0
    return (np.cbrt(1 + 3 * a * (x - k / 6.0)) - 1) / a


def adj_r2(d, x):
    """Adjusted R² of d on x (one regressor and an intercept), floored at 0."""
    r = len(d)
    xc = x - x.mean()
    sxx = (xc * xc).sum()
    syy = ((d - d.mean()) ** 2).sum()
    if sxx <= 0 or syy <= 0 or r < 4:
        return 0.0
    r2 = (xc * (d - d.mean())).sum() ** 2 / (sxx * syy)
    return max(1.0 - (1.0 - r2) * (r - 1) / (r - 2), 0.0)


def prepare(d, bt, pos):
    """Rule-independent parts of one replicate's interval."""
    r = len(d)
    mean = d.mean()
    s2 = d.var(ddof=1)
    third = ((d - mean) ** 3).mean() / r**2
    nu_d = kdf(r, exkurt(d))
    cols = [b for b in range(bt.shape[1]) if not np.isnan(bt[:, b]).any()]
    x = bt[:, cols]
    rr, c = x.shape
    rm, cm = x.mean(1), x.mean(0)
    g = rm.mean()
    ms_c = ((cm - g) ** 2).sum() * rr / (c - 1)
    ms_e = ((x - rm[:, None] - cm[None, :] + g) ** 2).sum() / ((rr - 1) * (c - 1))
    t = max((ms_c - ms_e) / (rr * c), 0.0)
    extra = []
    if t > 0:
        third += ((cm - cm.mean()) ** 3).mean() / c**2
        extra = [(ms_c / (rr * c), kdf(c, exkurt(cm))), (-ms_e / (rr * c), (rr - 1) * (c - 1))]
    return mean, s2, r, t, third, nu_d, extra, adj_r2(d, pos)


def interval(p, f, q_cache):
    mean, s2, r, t, third, nu_d, extra, _ = p
    terms = [((1.0 / r + f) * s2, nu_d)] + extra
    var = s2 / r + s2 * f + t
    v = sum(a for a, _ in terms)
    den = sum(a * a / nu for a, nu in terms)
    df = max(v * v / den, 1.0) if v > 0 and den > 0 else r - 1.0
    key = round(df, 9)
    if key not in q_cache:
        q_cache[key] = stats.t.ppf(0.975, df)
    q = q_cache[key]
    se = np.sqrt(var)
    k = third / var**1.5 if var > 0 else 0.0
    lo_q, hi_q = (hall_inv(q, k), hall_inv(-q, k)) if abs(k) > 1e-6 else (q, -q)
    return mean - lo_q * se, mean - hi_q * se


def degree(k, rho):
    return rho**k / (1 - rho**k)


def main():
    if len(sys.argv) < 3:
        sys.exit(__doc__)
    stem, m_res = sys.argv[1], int(sys.argv[2])
    data = np.fromfile(stem + ".bin", dtype="<f8")
    recs = []
    with open(stem + ".csv", newline="") as fh:
        for r in csv.DictReader(fh):
            rr, b, o = int(r["repeats"]), int(r["batches"]), int(r["offset"])
            n = int(r["size"])
            d = data[o : o + rr]
            bt = data[o + rr : o + rr + rr * b].reshape(rr, b)
            pos = data[o + rr + rr * b : o + 2 * rr + rr * b]
            rare = np.minimum(pos, n - pos).mean() < RARE_ROWS
            recs.append((r["population"], r["method"], r["reference"], r["metric"], n,
                         float(r["truth"]), r["extreme"] == "1", rare, prepare(d, bt, pos)))

    def ns(rec):
        return not (stationary(rec[1], rec[3]) and stationary(rec[2], rec[3]))

    rules = {
        "extreme": lambda rec, rho: degree(1 if rec[6] else 2, rho),
        "rare": lambda rec, rho: degree(1 if rec[6] or rec[7] else 2, rho),
        "stationary": lambda rec, rho: degree(1 if rec[6] or ns(rec) else 2, rho),
        "stationary+rare": lambda rec, rho: degree(1 if rec[6] or rec[7] or ns(rec) else 2, rho),
        "k1.5-nonstationary+rare": lambda rec, rho: degree(
            1 if rec[6] or rec[7] else (1.5 if ns(rec) else 2), rho),
        "composition+rare": lambda rec, rho: degree(1, rho) if rec[6] or rec[7] else (
            rec[8][7] * degree(1, rho) + (1 - rec[8][7]) * degree(2, rho)),
    }
    q_cache = {}
    print(f"inputs: {stem}.csv/.bin, {len(recs)} replicate-cells, reservoir {m_res}")
    print("coverage of the default interval (decomposed-skew) under each reservoir rule;")
    print("a cell is rare when its calibration samples held < 10 minority rows on average\n")
    for name, rule in rules.items():
        cells = {}
        for rec in recs:
            lo, hi = interval(rec[8], rule(rec, rec[4] / m_res), q_cache)
            key = rec[:5]
            c = cells.setdefault(key, [0, 0, 0, 0.0, 0])
            c[0] += lo <= rec[5] <= hi
            c[1] += 1
            c[2] += rec[7]
            c[3] += hi - lo
        print(f"rule {name}")
        print("  population            metric    class     cells  mean%  <93%  <91%  >97.5%")
        groups = {}
        for key, (cov, n, rare_n, w, _) in cells.items():
            cls = "rare" if rare_n * 2 > n else "not rare"
            groups.setdefault((key[0], key[3], cls), []).append(cov / n)
            groups.setdefault(("all", "all", cls), []).append(cov / n)
        for (pop, metric, cls), v in sorted(groups.items(), key=lambda kv: (kv[0][0] == "all", kv[0])):
            v = np.array(v)
            print(f"  {pop:21s} {metric:9s} {cls:9s} {len(v):5d} {100 * v.mean():6.1f} "
                  f"{(v < 0.93).sum():5d} {(v < 0.91).sum():5d} {(v > 0.975).sum():7d}")
        print()


if __name__ == "__main__":
    main()
