#!/usr/bin/env python3
"""Turn the coverage study's table (`docs/coverage/table.csv`, written by
`cargo bench --bench coverage -- --out docs/coverage`) into the Markdown
tables of docs/statistics.md.

Usage: python3 scripts/coverage_markdown.py docs/coverage/table.csv [INTERVAL]

One table per population for INTERVAL (default: the default interval
`decomposed-skew`): a row per (method − reference, metric), a column per
calibration size, the coverage of the nominal interval in percent; cells
outside 93–97% are set in bold. Then a summary line per interval kind.
Last, the "Rare classes" table: per population and size, the expected rows
of the rarer class in a calibration sample (n × min(π, 1 − π), π the
population's base rate: the values stated with each population in
benches/coverage/study.rs; two-step's 0.482 is the integral of its map over
its Kumaraswamy(2, 3) scores), and the coverage of the cells there. It is the
evidence for the report's 10-row flag (`RARE_CLASS_ROWS`).
Last, "Approximate intervals": per population and metric, the coverage of
the replicates a report does not mark approximate († rare class, ‡ a
log-loss comparison with a method that can predict 0 or 1; columns
`approximate` and `covered_unmarked`), over the cells where at least half the
replicates are unmarked, and every such cell outside 93–97%.
Standard library only.
"""
import csv
import sys
from collections import OrderedDict

DEFAULT = "decomposed-skew"

# Base rates of the study's populations (see the docstring).
BASE_RATE = {
    "calibrated": 0.457,
    "over-confident": 0.51,
    "rare-under-confident": 0.030,
    "rare-over-confident": 0.045,
    "two-step": 0.482,
}
RARE_ROWS = 10


def main() -> None:
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    kind = sys.argv[2] if len(sys.argv) > 2 else DEFAULT
    with open(sys.argv[1], newline="") as f:
        rows = list(csv.DictReader(f))
    if not rows:
        sys.exit(f"{sys.argv[1]}: no rows")
    reps = sorted({int(r["replicates"]) for r in rows})
    sizes = sorted({int(r["size"]) for r in rows})
    pops = list(OrderedDict.fromkeys(r["population"] for r in rows))
    print(f"Interval `{kind}`, {', '.join(map(str, reps))} replicates per cell; "
          "coverage in percent, **bold** outside 93–97%.\n")
    for pop in pops:
        print(f"#### Population `{pop}`\n")
        print("| method − reference | metric | " + " | ".join(f"n = {n}" for n in sizes) + " |")
        print("|---|---|" + "---|" * len(sizes))
        cells = OrderedDict()
        for r in rows:
            if r["population"] != pop or r["interval"] != kind:
                continue
            key = (r["method"], r["reference"], r["metric"])
            cov = int(r["covered"]) / int(r["replicates"])
            cells.setdefault(key, {})[int(r["size"])] = cov
        for (m, ref, metric), by in cells.items():
            vals = []
            for n in sizes:
                c = by.get(n)
                if c is None:
                    vals.append("–")
                elif 0.93 <= c <= 0.97:
                    vals.append(f"{100 * c:.1f}")
                else:
                    vals.append(f"**{100 * c:.1f}**")
            print(f"| {m} − {ref} | {metric} | " + " | ".join(vals) + " |")
        print()
    print(f"Interval `{kind}` by population and metric:\n")
    print("| population | replicates | metric | cells | below 93% | above 97% | lowest | highest |")
    print("|---|---|---|---|---|---|---|---|")
    for pop in pops:
        for metric in OrderedDict.fromkeys(r["metric"] for r in rows):
            sel = [r for r in rows if r["population"] == pop and r["metric"] == metric and r["interval"] == kind]
            if not sel:
                continue
            cov = [int(r["covered"]) / int(r["replicates"]) for r in sel]
            nrep = ", ".join(sorted({r["replicates"] for r in sel}))
            print(f"| `{pop}` | {nrep} | {metric} | {len(cov)} | {sum(c < 0.93 for c in cov)} | "
                  f"{sum(c > 0.97 for c in cov)} | {100 * min(cov):.1f}% | {100 * max(cov):.1f}% |")
    print()
    print("Every interval kind over all cells:\n")
    print("| interval | cells | below 93% | above 97% | lowest | highest |")
    print("|---|---|---|---|---|---|")
    kinds = list(OrderedDict.fromkeys(r["interval"] for r in rows))
    for k in kinds:
        cov = [int(r["covered"]) / int(r["replicates"]) for r in rows if r["interval"] == k]
        below = sum(c < 0.93 for c in cov)
        above = sum(c > 0.97 for c in cov)
        name = f"**`{k}`**" if k == kind else f"`{k}`"
        print(f"| {name} | {len(cov)} | {below} | {above} | {100 * min(cov):.1f}% | {100 * max(cov):.1f}% |")

    print()
    print(f"Rare classes: interval `{kind}` by expected rows of the rarer class in the "
          f"calibration sample (flagged below {RARE_ROWS}):\n")
    print("| population | base rate | n | rarer-class rows | cells | below 93% | median | lowest |")
    print("|---|---|---|---|---|---|---|---|")
    groups = {True: [], False: []}
    for pop in pops:
        if pop not in BASE_RATE:
            continue
        pi = BASE_RATE[pop]
        for n in sizes:
            sel = [int(r["covered"]) / int(r["replicates"]) for r in rows
                   if r["population"] == pop and r["interval"] == kind and int(r["size"]) == n]
            if not sel:
                continue
            m = n * min(pi, 1 - pi)
            groups[m < RARE_ROWS].extend(sel)
            sel.sort()
            med = (sel[(len(sel) - 1) // 2] + sel[len(sel) // 2]) / 2
            print(f"| `{pop}` | {pi:.3f} | {n} | {m:.1f} | {len(sel)} | {sum(c < 0.93 for c in sel)} | "
                  f"{100 * med:.1f}% | {100 * sel[0]:.1f}% |")
    print()
    for flagged, cov in groups.items():
        if cov:
            print(f"- {'fewer' if flagged else 'at least'} {RARE_ROWS} rows: {len(cov)} cells, "
                  f"{sum(c < 0.93 for c in cov)} below 93% ({100 * sum(c < 0.93 for c in cov) / len(cov):.1f}%)")

    if "covered_unmarked" not in rows[0]:
        return
    print()
    print(f"Approximate intervals: interval `{kind}`, coverage of the replicates a report "
          "does not mark († or ‡), over the cells where at least half of them are unmarked:\n")
    print("| population | metric | cells | mostly marked | unmarked cells | below 93% | above 97% | lowest | highest |")
    print("|---|---|---|---|---|---|---|---|---|")
    outside = []
    totals = [0, 0, 0, 0, 0]
    for pop in pops:
        for metric in OrderedDict.fromkeys(r["metric"] for r in rows):
            sel = [r for r in rows if r["population"] == pop and r["metric"] == metric and r["interval"] == kind]
            if not sel:
                continue
            cov = []
            marked = 0
            for r in sel:
                n = int(r["replicates"]) - int(r["approximate"])
                if 2 * n < int(r["replicates"]):
                    marked += 1
                    continue
                c = int(r["covered_unmarked"]) / n
                cov.append(c)
                if not 0.93 <= c <= 0.97:
                    outside.append((r, c, n))
            below = sum(c < 0.93 for c in cov)
            above = sum(c > 0.97 for c in cov)
            for i, v in enumerate([len(sel), marked, len(cov), below, above]):
                totals[i] += v
            lo = f"{100 * min(cov):.1f}%" if cov else "–"
            hi = f"{100 * max(cov):.1f}%" if cov else "–"
            print(f"| `{pop}` | {metric} | {len(sel)} | {marked} | {len(cov)} | {below} | {above} | {lo} | {hi} |")
    print(f"| all | all | {totals[0]} | {totals[1]} | {totals[2]} | {totals[3]} | {totals[4]} | | |")
    print()
    print("Unmarked cells outside 93–97% (coverage of the unmarked replicates, their count):\n")
    for r, c, n in sorted(outside, key=lambda t: t[1]):
        print(f"- `{r['population']}`, {r['method']} − {r['reference']}, {r['metric']}, "
              f"n = {r['size']}: {100 * c:.1f}% of {n}")


if __name__ == "__main__":
    main()
