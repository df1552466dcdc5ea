#!/usr/bin/env bash
# Times the default suite cold (no cached score pools: every base model is
# trained) and warm (pools read from the cache), then `plumbline report` on the
# warm folder (analysis, tables and figures), and prints the unit count.
# Usage: scripts/bench_default_suite.sh [SUITE]   (from the repository root)
set -euo pipefail
suite="${1:-suites/open-uci.toml}"
cargo build --release --quiet
bin=target/release/plumbline
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
"$bin" check "$suite" | tail -2
start=$(date +%s%N)
"$bin" run "$suite" --out "$out/r" --quiet
cold_ms=$(( ($(date +%s%N) - start) / 1000000 ))
start=$(date +%s%N)
# Same cache folder (beside the results folder), so the pools are reused.
"$bin" run "$suite" --out "$out/r" --quiet --force
warm_ms=$(( ($(date +%s%N) - start) / 1000000 ))
start=$(date +%s%N)
"$bin" report "$out/r" > /dev/null
report_ms=$(( ($(date +%s%N) - start) / 1000000 ))
echo "cold run (training every base model): ${cold_ms} ms"
echo "warm run (cached score pools): ${warm_ms} ms"
echo "report on the warm folder: ${report_ms} ms"
