#!/bin/bash
# Submits a complete quarry job: an N-task array of batch/slurm/reco-array.sh
# and, after it (afterok: only if every task succeeded), batch/slurm/merge.sh.
#
#   batch/slurm/submit.sh N OUTDIR INPUT... [-- RECO-OPTIONS...]
#
# Extra sbatch options (partition, account, --cpus-per-task, --time) go in
# QUARRY_SBATCH, e.g. QUARRY_SBATCH="--cpus-per-task=4 --partition=short".
# Prints the two job ids. Results: OUTDIR/reco.csv and its manifest; logs
# in OUTDIR/logs. If shards fail, the merge is never started: rerun only
# those (see the README's "Batch jobs"), then run merge.sh.
set -euo pipefail
[ $# -ge 3 ] || { echo "usage: submit.sh N OUTDIR INPUT... [-- RECO-OPTIONS...]" >&2; exit 1; }
n=$1
outdir=$2
shift 2
here=$(cd "$(dirname "$0")" && pwd)
mkdir -p "$outdir/parts" "$outdir/logs"
# shellcheck disable=SC2086 # QUARRY_SBATCH is a list of options
array=$(sbatch --parsable ${QUARRY_SBATCH:-} --array=0-$((n - 1)) \
  --export=ALL,QUARRY_SHARDS="$n" --output="$outdir/logs/reco-%A_%a.log" \
  "$here/reco-array.sh" "$outdir" "$@")
array=${array%%;*}
# shellcheck disable=SC2086
merge=$(sbatch --parsable ${QUARRY_SBATCH:-} --dependency=afterok:"$array" \
  --output="$outdir/logs/merge-%j.log" "$here/merge.sh" "$outdir" "$n")
echo "reco array job $array ($n shards), merge job $merge (runs after the array succeeds)"
