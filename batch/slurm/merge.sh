#!/bin/bash
# Merges the N shard outputs of batch/slurm/reco-array.sh in OUTDIR/parts
# into OUTDIR/reco.csv (+ manifest) with `quarry merge`, which refuses
# (exit 5, naming each missing, duplicated or inconsistent shard) unless
# shards 0..N-1 all completed with the same inputs and options.
#
#   sbatch --dependency=afterok:ARRAY_JOB_ID batch/slurm/merge.sh OUTDIR N
#
# or directly, on any machine that sees OUTDIR: batch/slurm/merge.sh OUTDIR N
#SBATCH --job-name=quarry-merge
#SBATCH --cpus-per-task=1
#SBATCH --mem=512M
#SBATCH --time=02:00:00
#SBATCH --output=quarry-merge-%j.log
set -euo pipefail
[ $# -eq 2 ] || { echo "usage: merge.sh OUTDIR N" >&2; exit 1; }
outdir=$1
n=$2
parts=()
for ((k = 0; k < n; k++)); do
  parts+=("$outdir/parts/reco-$k.csv")
done
"${QUARRY:-quarry}" merge "${parts[@]}" -o "$outdir/reco.csv"
