#!/usr/bin/env bash
# Scaling figures of the default suite: wall time and peak memory
# (/usr/bin/time -v) of `run` at ×1, ×4, ×16 the units (the repeats
# multiplied), `report` on the biggest folder, the speed-up from 1 to 2
# threads, and a 2-shard run + merge against one machine; also the size of
# units.csv.gz against the plain CSV it holds.
# Usage: scripts/bench_scaling.sh [MULTIPLIERS]   (from the repository root;
#   default "1 4 16"). Runs under `nice`; pass e.g. "1 4" on a busy machine.
set -euo pipefail
mults="${1:-1 4 16}"
cargo build --release --quiet
bin=$PWD/target/release/plumbline
base=suites/open-uci.toml
work=$(mktemp -d)
tmp_suites=()
trap 'rm -rf "$work" "${tmp_suites[@]}"' EXIT
repeats=$(sed -n 's/^repeats = \([0-9]*\)$/\1/p' "$base")
measure() { # label, command...: prints "label  wall_s  peak_MiB"
  local label=$1; shift
  /usr/bin/time -v -o "$work/time.txt" nice -n 10 "$@" >/dev/null 2>"$work/err.txt" ||
    { cat "$work/err.txt" >&2; exit 1; }
  local wall rss
  wall=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$work/time.txt" |
    awk -F: '{ s = 0; for (i = 1; i <= NF; i++) s = s * 60 + $i; printf "%.1f", s }')
  rss=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$work/time.txt")
  printf "%-44s %8s s %8s MiB\n" "$label" "$wall" "$((rss / 1024))" | tee -a "$work/table.txt"
}
echo "machine: $(nproc) cores, $(uname -m), run under nice -n 10 (shared CPU)"
echo "warming the score-pool cache (not timed)"
"$bin" run "$base" --out "$work/warm" --quiet 2>&1 | sed "s|$work|(scratch folder)|"
: >"$work/table.txt"
last=""
for m in $mults; do
  s="suites/.bench-x$m.toml"
  tmp_suites+=("$s")
  sed "s/^repeats = .*/repeats = $((repeats * m))/" "$base" >"$s"
  units=$("$bin" check "$s" | tail -2 | head -1)
  echo "×$m: $units"
  measure "run ×$m (2 threads)" "$bin" run "$s" --out "$work/x$m" --quiet --threads 2
  last=$m
  if [ "$m" = 1 ]; then
    measure "run ×1 (1 thread)" "$bin" run "$s" --out "$work/x1-t1" --quiet --threads 1
  fi
done
m=$last s="suites/.bench-x$m.toml"
measure "report ×$m" "$bin" report "$work/x$m"
for k in 1 2; do
  measure "run ×$m shard $k/2 (2 threads)" "$bin" run "$s" --shard "$k/2" --out "$work/x$m-s$k" --quiet --threads 2
done
measure "merge ×$m (2 shards)" "$bin" merge "$work/x$m-s1" "$work/x$m-s2" --out "$work/x$m-merged" --quiet
cmp "$work/x$m/paired.csv" "$work/x$m-merged/paired.csv" && echo "merged paired.csv identical to the one-machine run"
for m in $mults; do
  gz=$(stat -c %s "$work/x$m/units.csv.gz")
  plain=$(gzip -dc "$work/x$m/units.csv.gz" | wc -c)
  echo "units table ×$m: units.csv.gz $((gz / 1024)) KiB, plain CSV $((plain / 1024)) KiB"
done
echo
echo "summary (wall seconds, peak resident memory):"
cat "$work/table.txt"
t1=$(awk '/run ×1 \(1 thread\)/ { print $(NF-3) }' "$work/table.txt")
t2=$(awk '/run ×1 \(2 threads\)/ { print $(NF-3) }' "$work/table.txt")
[ -n "$t1" ] && [ -n "$t2" ] && awk -v a="$t1" -v b="$t2" 'BEGIN { printf "speed-up 1 → 2 threads at ×1: %.2f\n", a / b }'
one=$(awk -v m="$last" '$0 ~ "run ×" m " \\(2 threads\\)" { print $(NF-3) }' "$work/table.txt")
sh=$(awk '/shard [12]\/2/ { s += $(NF-3) } END { print s }' "$work/table.txt")
mg=$(awk '/^merge/ { print $(NF-3) }' "$work/table.txt")
awk -v o="$one" -v s="$sh" -v g="$mg" -v m="$last" 'BEGIN {
  printf "×%s: one machine %.1f s; 2 shards run one after the other %.1f s + merge %.1f s = %.0f%% of one machine (as 2 parallel machines: max shard + merge)\n", m, o, s, g, 100 * (s + g) / o }'
