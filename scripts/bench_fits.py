#!/usr/bin/env python3
"""Fit times of plumbline's methods against numpy and scikit-learn on the same rows.

    python3 scripts/bench_fits.py [ROWS] [RUNS] > docs/bench/fits.txt

ROWS defaults to 1000000, RUNS to 7 (at least 5). Needs numpy and scikit-learn
(for example in a virtual environment: `python3 -m venv VENV && VENV/bin/pip
install numpy scikit-learn`, then run the script with VENV/bin/python3).

The rows: z ~ N(0, 1.5²), score s = σ(z) (a probability), label y ~
Bernoulli(σ(0.7 z + 0.5 tanh(1.5 z) − 0.2)), numpy seed 20261204 (the
generator of benches/methods.rs, redrawn in numpy). They are written to a
temporary file that the Rust example `examples/fit_timing.rs` (release build,
built here with cargo; CARGO_TARGET_DIR is honoured) reads, so both sides time
the same rows. Every figure is the median wall-clock time of RUNS runs.

Reference computations:
  isotonic     vs np.sort(s) (a copy of the sorted scores)
  platt        vs LogisticRegression(penalty=None, solver="lbfgs") on [s]
  beta         vs the same on [ln s, -ln(1 - s)] (s clipped to [1e-12, 1 - 1e-12])
  temperature  vs the same without intercept on [logit s] (same clip)
scikit-learn runs with max_iter=1000 (its default of 100 can stop short); its
FutureWarning about `penalty` (deprecated in 1.8 in favour of C=np.inf) is
silenced.
The script is run by hand; no test runs it.
"""

import os
import platform
import subprocess
import sys
import tempfile
import time
import warnings

import numpy as np
import sklearn
from sklearn.linear_model import LogisticRegression

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def median_ms(runs, f):
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        f()
        times.append((time.perf_counter() - t0) * 1e3)
    return float(np.median(times))


def main():
    warnings.filterwarnings("ignore", category=FutureWarning)
    rows = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    runs = int(sys.argv[2]) if len(sys.argv) > 2 else 7
    if rows < 2 or runs < 5:
        sys.exit("bench_fits: ROWS must be >= 2 and RUNS >= 5")

    def sh(*cmd):
        return subprocess.run(cmd, cwd=ROOT, check=True, capture_output=True, text=True).stdout.strip()

    print(f"command: python3 scripts/bench_fits.py {rows} {runs}")
    print(f"commit: {sh('git', 'rev-parse', 'HEAD')}")
    print(f"machine: nproc {sh('nproc')}; {sh('uname', '-srm')}")
    print(f"rustc: {sh('rustc', '--version')}")
    print(f"python {platform.python_version()}, numpy {np.__version__}, scikit-learn {sklearn.__version__}")
    print(f"rows {rows}, median of {runs} runs, wall-clock milliseconds")
    print()

    rng = np.random.default_rng(20261204)
    z = 1.5 * rng.standard_normal(rows)
    s = 1.0 / (1.0 + np.exp(-z))
    y = rng.random(rows) < 1.0 / (1.0 + np.exp(-(0.7 * z + 0.5 * np.tanh(1.5 * z) - 0.2)))

    subprocess.run(
        ["cargo", "build", "--release", "--quiet", "--example", "fit_timing"], cwd=ROOT, check=True
    )
    target = os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target"))
    exe = os.path.join(target, "release", "examples", "fit_timing")
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "rows.bin")
        with open(path, "wb") as f:
            f.write(s.astype("<f8").tobytes())
            f.write(y.astype(np.uint8).tobytes())
        out = subprocess.run([exe, path, str(runs)], check=True, capture_output=True, text=True).stdout
    ours = {}
    small = []
    for line in out.splitlines():
        parts = line.split()
        if parts[0].startswith("small-"):
            small.append((int(parts[0][6:]), float(parts[1]), float(parts[2])))
        else:
            ours[parts[0]] = float(parts[1])

    c = np.clip(s, 1e-12, 1 - 1e-12)
    x_platt = s.reshape(-1, 1)
    x_beta = np.column_stack([np.log(c), -np.log1p(-c)])
    x_temp = (np.log(c) - np.log1p(-c)).reshape(-1, 1)

    def lr(x, intercept=True):
        return lambda: LogisticRegression(
            penalty=None, solver="lbfgs", max_iter=1000, fit_intercept=intercept
        ).fit(x, y)

    ref = {
        "np.sort": median_ms(runs, lambda: np.sort(s)),
        "sklearn logistic [s]": median_ms(runs, lr(x_platt)),
        "sklearn logistic [ln s, -ln(1-s)]": median_ms(runs, lr(x_beta)),
        "sklearn logistic, no intercept [logit s]": median_ms(runs, lr(x_temp, intercept=False)),
    }

    print(f"{'case':<44} {'ms':>10}")
    for name in ["pair-sort", "isotonic-before", "isotonic", "platt", "beta", "temperature"]:
        print(f"{'plumbline ' + name:<44} {ours[name]:>10.2f}")
    for name, v in ref.items():
        print(f"{name:<44} {v:>10.2f}")
    for name in ["isotonic-blocks-comparison", "isotonic-blocks-radix"]:
        print(f"{'plumbline ' + name:<44} {ours[name]:>10.2f}")
    print()
    print("isotonic blocks on the first rows (median of 201 runs, microseconds): comparison vs radix key sort")
    print(f"{'rows':>8} {'comparison':>12} {'radix':>12}")
    for m, c, r in small:
        print(f"{m:>8} {c:>12.1f} {r:>12.1f}")
    print()
    print("ratios")
    ratios = [
        ("isotonic / np.sort", ours["isotonic"], ref["np.sort"]),
        ("isotonic-before / np.sort", ours["isotonic-before"], ref["np.sort"]),
        ("pair-sort / np.sort", ours["pair-sort"], ref["np.sort"]),
        ("platt / sklearn logistic [s]", ours["platt"], ref["sklearn logistic [s]"]),
        ("beta / sklearn logistic [ln s, -ln(1-s)]", ours["beta"], ref["sklearn logistic [ln s, -ln(1-s)]"]),
        (
            "temperature / sklearn logistic [logit s]",
            ours["temperature"],
            ref["sklearn logistic, no intercept [logit s]"],
        ),
    ]
    for name, a, b in ratios:
        print(f"{name:<44} {a / b:>10.2f}")


if __name__ == "__main__":
    main()
