#!/usr/bin/env bash
# Throughput and peak memory of `plumbline apply` on a generated CSV.
#
#   scripts/bench_apply.sh [ROWS] [WORK_DIR]
#
# ROWS defaults to 20000000, WORK_DIR to target/bench-apply (about 0.6 GB of
# CSV per 20 M rows, twice: input and output). Builds the release binary and
# the examples `apply_bench_data` (the generated file) and `csv_rewrite` (the
# baseline: the same reader and writer, no map), fits isotonic, spline and
# Platt maps on a 200,000-row file from the same generator, then times, under
# `nice -n 10` and /usr/bin/time -v (needs GNU time), the baseline and each
# apply on ROWS rows and on ROWS/10 rows (peak memory must not grow with the
# row count). Prints one table; docs/performance.md quotes it.
set -euo pipefail
cd "$(dirname "$0")/.."
ROWS=${1:-20000000}
WORK=${2:-target/bench-apply}
mkdir -p "$WORK"
cargo build --release --locked --quiet --bin plumbline --example apply_bench_data --example csv_rewrite
BIN=target/release/plumbline
EX=target/release/examples
SMALL=$((ROWS / 10))
[ -f "$WORK/train.csv" ] || $EX/apply_bench_data 200000 "$WORK/train.csv"
[ -f "$WORK/big-$ROWS.csv" ] || $EX/apply_bench_data "$ROWS" "$WORK/big-$ROWS.csv"
[ -f "$WORK/big-$SMALL.csv" ] || $EX/apply_bench_data "$SMALL" "$WORK/big-$SMALL.csv"
for m in isotonic spline platt; do
  $BIN fit --method "$m" --scores "$WORK/train.csv" --out "$WORK/$m.json" 2>/dev/null
done

# run NAME ROWS CMD...: wall seconds and peak RSS (KiB) of one command.
run() {
  local name=$1 rows=$2; shift 2
  local log="$WORK/time-$name-$rows.txt"
  nice -n 10 /usr/bin/time -v "$@" 2>"$log" >/dev/null
  local wall rss cpu
  cpu=$(awk -F': ' '/User time|System time/ {s += $2} END {print s}' "$log")
  wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$log" | awk -F: '{ if (NF==3) print $1*3600+$2*60+$3; else print $1*60+$2 }')
  rss=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$log")
  echo "$name $rows $wall $rss $cpu"
}

echo "# plumbline apply benchmark: $(nproc) cores, $(uname -m), run under nice -n 10 on a shared machine (load average $(cut -d' ' -f1-3 /proc/loadavg))"
echo "# input: $(head -c 200 "$WORK/big-$ROWS.csv" | head -2 | tail -1) ... ($(du -m "$WORK/big-$ROWS.csv" | cut -f1) MB for $ROWS rows)"
results=()
for rows in "$SMALL" "$ROWS"; do
  in="$WORK/big-$rows.csv"
  results+=("$(run rewrite "$rows" $EX/csv_rewrite "$in" "$WORK/out.csv")")
  for m in isotonic spline platt; do
    results+=("$(run "$m" "$rows" $BIN apply "$WORK/$m.json" --scores "$in" --out "$WORK/out.csv")")
  done
done
rm -f "$WORK/out.csv"
printf '%s\n' "${results[@]}" | awk '
  BEGIN { printf "%-9s %10s %8s %10s %10s %8s %12s %10s %12s\n", "command", "rows", "wall s", "M rows/s", "× rewrite", "CPU s", "M rows/CPU s", "CPU × rw", "peak RSS MB" }
  { name[NR]=$1; rows[NR]=$2; wall[NR]=$3; rss[NR]=$4; cpu[NR]=$5; if ($1=="rewrite") { base[$2]=$3; cbase[$2]=$5 } }
  END { for (i=1;i<=NR;i++) printf "%-9s %10d %8.2f %10.2f %10.2f %8.2f %12.2f %10.2f %12.1f\n", name[i], rows[i], wall[i], rows[i]/wall[i]/1e6, wall[i]/base[rows[i]], cpu[i], rows[i]/cpu[i]/1e6, cpu[i]/cbase[rows[i]], rss[i]/1024 }'
