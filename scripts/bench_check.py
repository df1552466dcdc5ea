#!/usr/bin/env python3
"""Time `plumbline check` on generated suites with many methods.

    scripts/bench_check.py [--bin PATH] [--work DIR] [COUNT ...]

COUNT defaults to 10000 30000 100000. Each suite has one small score-file task
and COUNT methods cycling through the method kinds (with distinct parameters
where a kind has them), plus an explicit `threshold_pairs` list of one pair:
the default pairs are every flexible method against every parametric one, a
list quadratic in size by definition, so a suite of many methods names its
pairs. Builds the release binary unless --bin is given, then prints one line
per suite: methods, suite size, wall seconds of `check`. docs/performance.md
quotes the output.
"""
import os
import subprocess
import sys
import time

KINDS = [
    ("identity", lambda i: ""),
    ("platt", lambda i: "target_smoothing = %s\n" % ("true" if i % 2 else "false")),
    ("isotonic", lambda i: "pseudo_count = %d.0\n" % (i % 7)),
    ("beta", lambda i: 'shape = "%s"\n' % ("tied" if i % 2 else "full")),
    ("binning", lambda i: "bins = %d\n" % (2 + i % 50)),
    ("temperature", lambda i: ""),
    ("centered-isotonic", lambda i: ""),
    ("spline", lambda i: "intervals = %d\n" % (4 + i % 30)),
    ("venn-abers", lambda i: ""),
]


def write_suite(path, count):
    parts = [
        'name = "check-bench"\nseed = 1\nrepeats = 10\nsizes = [50, 100]\n'
        'reference = "m0"\nmetrics = ["log_loss", "brier"]\n'
        'primary_metric = "log_loss"\n'
        'threshold_pairs = [["m2", "m1"]]\n\n'
        '[[task]]\nid = "t"\nscores = "scores.csv"\nscore_column = "p"\n'
        'label_column = "y"\nscore_kind = "probability"\n\n'
    ]
    for i in range(count):
        kind, params = KINDS[i % len(KINDS)]
        parts.append('[[method]]\nid = "m%d"\nkind = "%s"\n%s\n' % (i, kind, params(i)))
    with open(path, "w") as f:
        f.write("".join(parts))


def main():
    args = sys.argv[1:]
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    binary, work, counts = None, os.path.join(root, "target", "bench-check"), []
    while args:
        a = args.pop(0)
        if a == "--bin":
            binary = args.pop(0)
        elif a == "--work":
            work = args.pop(0)
        else:
            counts.append(int(a))
    counts = counts or [10000, 30000, 100000]
    if binary is None:
        subprocess.run(
            ["cargo", "build", "--release", "--locked", "--quiet", "--bin", "plumbline"],
            cwd=root,
            check=True,
        )
        binary = os.path.join(root, "target", "release", "plumbline")
    os.makedirs(work, exist_ok=True)
    with open(os.path.join(work, "scores.csv"), "w") as f:
        f.write("p,y\n")
        for i in range(1000):
            p = (i * 7919 % 1000) / 1000.0
            f.write("%.3f,%d\n" % (p, 1 if (i * 104729 % 1000) / 1000.0 < p else 0))
    print("methods  suite_bytes  check_seconds")
    for n in counts:
        suite = os.path.join(work, "methods-%d.toml" % n)
        write_suite(suite, n)
        t0 = time.monotonic()
        r = subprocess.run([binary, "check", suite], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        secs = time.monotonic() - t0
        if r.returncode != 0:
            sys.exit("check failed on %s: %s" % (suite, r.stderr.decode(errors="replace")))
        print("%7d  %11d  %13.2f" % (n, os.path.getsize(suite), secs))


if __name__ == "__main__":
    main()
