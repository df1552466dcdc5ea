#!/usr/bin/env bash
# Runs a command and writes its standard output to OUT, headed by what made it:
# the command line, the commit (and whether the code that decides the numbers
# had uncommitted changes), the machine, its load average at the start, and the
# Rust compiler. The file is written only when the command succeeds, through a
# temporary file beside OUT, so a failed run leaves the old output in place.
#
# Usage (from the repository root):
#   scripts/stamped.sh OUT COMMAND [ARGS...]
# e.g.
#   scripts/stamped.sh docs/bench/methods.txt cargo bench --locked --bench methods
set -euo pipefail
if [ "$#" -lt 2 ]; then
  echo "usage: scripts/stamped.sh OUT COMMAND [ARGS...]" >&2
  exit 2
fi
out="$1"
shift
dir=$(dirname "$out")
[ -d "$dir" ] || { echo "error: $dir: no such folder" >&2; exit 2; }
tmp=$(mktemp "$dir/.stamped.XXXXXX")
trap 'rm -f "$tmp"' EXIT
commit=$(git rev-parse HEAD 2>/dev/null || echo unknown)
if [ -n "$(git status --porcelain --untracked-files=no -- src benches examples scripts Cargo.toml Cargo.lock 2>/dev/null)" ]; then
  commit="$commit (with uncommitted changes)"
fi
{
  echo "command: $*"
  echo "commit: $commit"
  echo "machine: $(nproc) logical cores, $(uname -srm); load average at start $(cut -d' ' -f1-3 /proc/loadavg 2>/dev/null || echo unknown)"
  echo "rustc: $(rustc --version 2>/dev/null || echo unknown)"
  echo "date: $(date -u +%Y-%m-%dT%H:%M:%SZ)"
  echo
  "$@"
} > "$tmp"
mv "$tmp" "$out"
trap - EXIT
echo "wrote $out" >&2
