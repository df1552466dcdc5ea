#!/usr/bin/env python3
"""Turn the output of `cargo bench --bench coverage` into the Markdown tables of
docs/statistics.md.

Usage: cargo bench -q --bench coverage -- [OPTIONS] | python3 scripts/coverage_markdown.py [INTERVAL ...]

With INTERVAL names (e.g. `decomposed-skew decomposed`) only those rows are
kept; the default interval's coverage is set in bold. Standard library only.
"""
import sys

DEFAULT = "decomposed-skew"


def main() -> None:
    keep = set(sys.argv[1:])
    print("| metric | n | interval | truth θ(n) | ± | coverage | missed low | missed high | half | rms_se | rmse |")
    print("|---|---|---|---|---|---|---|---|---|---|---|")
    for line in sys.stdin:
        f = line.split()
        if len(f) != 13 or f[0] not in ("brier", "log_loss") or not f[1].isdigit():
            continue
        metric, n, kind, truth, truth_se, cov, _cov_se, low, high, half, _bias, rms_se, rmse = f
        if keep and kind not in keep:
            continue
        cov = f"**{cov}**" if kind == DEFAULT else cov
        print(f"| {metric} | {n} | `{kind}` | {truth} | {truth_se} | {cov} | {low} | {high} | {half} | {rms_se} | {rmse} |")


if __name__ == "__main__":
    main()
