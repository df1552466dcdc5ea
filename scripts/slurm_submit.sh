#!/usr/bin/env bash
# Runs a suite on a Slurm cluster: a job array with one task per shard
# (`plumbline run SUITE --shard K/N`), then a merge job that starts only when
# every shard succeeded (`--dependency=afterok`).
#
# Usage: scripts/slurm_submit.sh SUITE OUT_DIR N [SBATCH_OPTION ...]
#   Shard K is written to OUT_DIR/shard-K, the merged results folder to
#   OUT_DIR/merged, the job logs to OUT_DIR/logs/. Extra options go to both
#   sbatch calls (e.g. --partition=short --time=2:00:00 --cpus-per-task=4).
#   PLUMBLINE names the binary [default: plumbline on PATH]. OUT_DIR must be on
#   a file system every node sees; shards share the score-pool cache in
#   OUT_DIR/.cache. Prints the two job ids; with WAIT=1 it blocks until the
#   merge job has ended (sbatch --wait) and exits with its status.
#
# A shard that fails can be resubmitted alone (sbatch --array=K ...): its
# journal resumes the finished units. Nothing here is Slurm-specific apart
# from the two sbatch calls: any scheduler that hands each task an index
# (a Kubernetes indexed job's JOB_COMPLETION_INDEX + 1, GNU parallel's {#},
# a for-loop over ssh) can run the same shard commands and the same merge.
set -euo pipefail
if [ $# -lt 3 ]; then
  echo "usage: $0 SUITE OUT_DIR N [SBATCH_OPTION ...]" >&2
  exit 2
fi
suite=$1 out=$2 n=$3
shift 3
bin=${PLUMBLINE:-plumbline}
mkdir -p "$out/logs"
q() { printf '%q' "$1"; }
shard_cmd="exec $(q "$bin") run $(q "$suite") --shard \${SLURM_ARRAY_TASK_ID}/$n --out $(q "$out")/shard-\${SLURM_ARRAY_TASK_ID} --quiet"
array=$(sbatch --parsable --job-name=plumbline-shards --array=1-"$n" \
  --output="$out/logs/shard-%a.log" "$@" --wrap "$shard_cmd")
merge_cmd="exec $(q "$bin") merge $(q "$out")/shard-* --out $(q "$out")/merged --quiet"
wait_flag=()
if [ "${WAIT:-0}" = 1 ]; then wait_flag=(--wait); fi
echo "shards: job ${array%%;*} (array 1-$n); merge: after it, into $out/merged"
sbatch --parsable --job-name=plumbline-merge --dependency=afterok:"${array%%;*}" \
  --output="$out/logs/merge.log" "${wait_flag[@]}" "$@" --wrap "$merge_cmd"
