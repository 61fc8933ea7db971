#!/bin/bash
# quarry on a Slurm job array: task K of an array 0..N-1 reconstructs
# shard K/N of the inputs into OUTDIR/parts/reco-K.csv (+ its manifest).
#
#   sbatch --array=0-9 --cpus-per-task=2 batch/slurm/reco-array.sh \
#       OUTDIR INPUT... [-- RECO-OPTIONS...]
#
# N is the array's size (SLURM_ARRAY_TASK_COUNT) when the array is exactly
# 0..N-1. To rerun some shards of an N-shard job (--array=2,5), set
# QUARRY_SHARDS=N: `sbatch --array=2 --export=ALL,QUARRY_SHARDS=10 …`.
# Threads follow --cpus-per-task. QUARRY names the binary (default:
# `quarry` on PATH). The output is written on node-local scratch
# (QUARRY_SCRATCH, else SLURM_TMPDIR/TMPDIR, else /tmp) and moved into
# OUTDIR/parts when complete: output first, then its manifest. A failed
# shard leaves neither, and the task exits non-zero (quarry's exit code).
# Logs: give `--output=OUTDIR/logs/reco-%A_%a.log` (batch/slurm/submit.sh
# does, after creating the folder: Slurm opens the log before this runs).
#SBATCH --job-name=quarry-reco
#SBATCH --cpus-per-task=1
#SBATCH --mem=1G
#SBATCH --time=04:00:00
#SBATCH --output=quarry-reco-%A_%a.log
set -euo pipefail

die() { echo "reco-array.sh: $*" >&2; exit 1; }

[ -n "${SLURM_ARRAY_TASK_ID:-}" ] || die "submit with sbatch --array=0-(N-1)"
[ $# -ge 2 ] || die "usage: reco-array.sh OUTDIR INPUT... [-- RECO-OPTIONS...]"
outdir=$1
shift
inputs=()
while [ $# -gt 0 ] && [ "$1" != "--" ]; do
  inputs+=("$1")
  shift
done
[ "${1:-}" = "--" ] && shift
[ ${#inputs[@]} -gt 0 ] || die "no INPUT given"

k=$SLURM_ARRAY_TASK_ID
if [ -n "${QUARRY_SHARDS:-}" ]; then
  n=$QUARRY_SHARDS
else
  n=${SLURM_ARRAY_TASK_COUNT:?}
  # A partial array (a rerun of some shards) would silently change N.
  [ "${SLURM_ARRAY_TASK_MIN:-0}" = 0 ] && [ $((SLURM_ARRAY_TASK_MAX + 1)) = "$n" ] ||
    die "the array is not 0..N-1 (min ${SLURM_ARRAY_TASK_MIN:-?}, max ${SLURM_ARRAY_TASK_MAX:-?}, $n tasks): set QUARRY_SHARDS=N"
fi
[ "$k" -lt "$n" ] || die "task $k is outside 0..$((n - 1)) (QUARRY_SHARDS=$n)"
threads=${SLURM_CPUS_PER_TASK:-1}
quarry=${QUARRY:-quarry}

mkdir -p "$outdir/parts" "$outdir/logs"
final="$outdir/parts/reco-$k.csv"
scratch_root=${QUARRY_SCRATCH:-${SLURM_TMPDIR:-${TMPDIR:-/tmp}}}
scratch=$(mktemp -d "$scratch_root/quarry-${SLURM_ARRAY_JOB_ID:-job}-$k.XXXXXX")
trap 'rm -rf "$scratch"' EXIT

echo "quarry shard $k/$n on $(hostname), $threads thread(s), $(date -u +%FT%TZ)"
rc=0
"$quarry" reco "${inputs[@]}" "$@" --shard "$k/$n" --threads "$threads" \
  --no-progress -o "$scratch/reco.csv" || rc=$?
if [ "$rc" -ne 0 ]; then
  echo "quarry shard $k/$n FAILED with exit code $rc" >&2
  exit "$rc"
fi

# Into place: an older manifest goes first, then the output, then its
# manifest, each through a hidden name on the target file system and a
# rename (mv -T refuses to move into a directory of that name).
move_in() {
  cp "$1" "$(dirname "$2")/.$(basename "$2").moving-$$"
  mv -T "$(dirname "$2")/.$(basename "$2").moving-$$" "$2"
}
rm -f "$final.manifest.json"
if ! move_in "$scratch/reco.csv" "$final" || ! move_in "$scratch/reco.csv.manifest.json" "$final.manifest.json"; then
  rm -f "$outdir/parts/.reco-$k.csv".*moving-$$
  echo "quarry shard $k/$n FAILED: cannot move the output into $final" >&2
  exit 3
fi
echo "quarry shard $k/$n done: $final"
