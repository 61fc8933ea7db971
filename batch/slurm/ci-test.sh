#!/bin/bash
# CI: the Slurm workflow of batch/slurm/ on a real single-node Slurm.
#
# Installs Debian's slurm-wlm and munge if missing (needs root and the
# package mirror), writes a one-node configuration for this host (2 CPUs;
# proctrack/linuxproc and task/none, which need no cgroups; no accounting),
# starts munged (unless running), slurmctld and slurmd, waits until sinfo
# shows the node idle, then:
#   1. submits reco-array.sh as shipped over the demo events, N = 4
#      (`sbatch --wait`), and runs merge.sh after it (afterok dependency);
#      the merge must equal an unsharded run byte for byte;
#   2. makes shard 2 of a second job fail (its output path is blocked by a
#      directory), shows that the array exits non-zero and that the merge
#      refuses naming parts/reco-2.csv, reruns only shard 2 (and shows a
#      partial array without QUARRY_SHARDS is refused), merges, compares;
#   3. runs submit.sh (array + dependent merge) and compares again;
#   4. stops the daemons it started, by process id.
# Any failure exits non-zero; nothing is skipped. Prints the time taken.
#
#   batch/slurm/ci-test.sh [QUARRY_BINARY]    (default target/release/quarry)
set -euo pipefail
started=$EPOCHREALTIME
repo=$(cd "$(dirname "$0")/../.." && pwd)
slurm_dir="$repo/batch/slurm"
quarry=$(realpath "${1:-$repo/target/release/quarry}")
elapsed() { awk -v a="$started" -v b="$EPOCHREALTIME" 'BEGIN { printf "%.1f", b - a }'; }
say() { printf '[slurm-ci %6ss] %s\n' "$(elapsed)" "$*"; }
fail() { say "FAILED: $*"; exit 1; }

[ -x "$quarry" ] || fail "no quarry binary at $quarry (cargo build --release --bin quarry)"

state=$(mktemp -d /tmp/quarry-slurm-ci.XXXXXX)
chmod 755 "$state"
work="$state/work"
mkdir -p "$work"
# shellcheck source=batch/slurm/local-slurm.sh
. "$slurm_dir/local-slurm.sh"
on_exit() {
  local rc=$?
  stop_local_slurm
  if [ "$rc" -ne 0 ]; then
    say "logs kept in $state"
    tail -n 20 "$state"/slurmctld.log "$state"/slurmd.log 2>/dev/null || true
  else
    rm -rf "$state"
  fi
  say "Slurm CI step took $(elapsed) s (exit $rc)"
}
trap on_exit EXIT
start_local_slurm "$state"

# The demo events (three files read as one stream), three hypotheses in
# non-alphabetical order, with the fit.
inputs=("$repo"/demo-events/q7_ttbar.csv.gz "$repo"/demo-events/q7_bquark_900.csv.gz "$repo"/demo-events/q7_bquark_1400.csv.gz)
opts=(-H twtw-ljets-boosted -H ttbar-ljets -H bz-2l --fit)
export QUARRY="$quarry"
cd "$work"
"$quarry" reco "${inputs[@]}" "${opts[@]}" -j 2 -q -o unsharded.csv
say "unsharded run: $(($(wc -l <unsharded.csv) - 1)) rows"

same() { cmp "$1" unsharded.csv || fail "$1 differs from the unsharded run"; say "$1 is byte-identical to the unsharded run"; }

# 1. The array script as shipped (default log names in the submit
#    directory; the script creates run1/parts itself), then the merge.
array=$(sbatch --parsable --wait --array=0-3 "$slurm_dir/reco-array.sh" run1 "${inputs[@]}" -- "${opts[@]}") ||
  fail "array job failed: $(cat quarry-reco-*.log)"
say "array job $array (4 shards) finished with exit code 0: $(ls run1/parts | tr '\n' ' ')"
sbatch --parsable --wait --dependency=afterok:"$array" --output=run1/logs/merge-%j.log \
  "$slurm_dir/merge.sh" run1 4 >/dev/null || fail "merge job failed: $(cat run1/logs/merge-*.log)"
same run1/reco.csv

# 2. Shard 2 fails (a directory blocks its output path): the array exits
#    non-zero, the merge refuses naming the shard; rerun shard 2 only.
mkdir -p run2/parts/reco-2.csv/blocker run2/logs
rc=0
sbatch --parsable --wait --array=0-3 --export=ALL,QUARRY_SHARDS=4 --output=run2/logs/reco-%A_%a.log \
  "$slurm_dir/reco-array.sh" run2 "${inputs[@]}" -- "${opts[@]}" >/dev/null || rc=$?
[ "$rc" -ne 0 ] || fail "the array with a failing shard exited 0"
say "array with a blocked shard 2 exited $rc; $(grep -h FAILED run2/logs/reco-*.log)"
rc=0
sbatch --parsable --wait --output=run2/logs/merge-first.log "$slurm_dir/merge.sh" run2 4 >/dev/null || rc=$?
[ "$rc" -eq 5 ] || fail "merge with shard 2 missing exited $rc, expected 5: $(cat run2/logs/merge-first.log)"
grep -q "run2/parts/reco-2.csv" run2/logs/merge-first.log || fail "the refusal does not name shard 2"
[ ! -e run2/reco.csv ] || fail "a refused merge wrote run2/reco.csv"
say "merge refused (exit 5): $(tr '\n' ' ' <run2/logs/merge-first.log)"
rm -r run2/parts/reco-2.csv
rc=0
sbatch --parsable --wait --array=2 --output=run2/logs/partial-%A_%a.log \
  "$slurm_dir/reco-array.sh" run2 "${inputs[@]}" -- "${opts[@]}" >/dev/null || rc=$?
[ "$rc" -ne 0 ] && grep -q "QUARRY_SHARDS" run2/logs/partial-*.log ||
  fail "a partial array without QUARRY_SHARDS was not refused"
say "rerun of shard 2 without QUARRY_SHARDS refused: $(cat run2/logs/partial-*.log)"
sbatch --parsable --wait --array=2 --export=ALL,QUARRY_SHARDS=4 --output=run2/logs/rerun-%A_%a.log \
  "$slurm_dir/reco-array.sh" run2 "${inputs[@]}" -- "${opts[@]}" >/dev/null ||
  fail "rerun of shard 2 failed: $(cat run2/logs/rerun-*.log)"
say "shard 2 rerun alone: exit 0"
sbatch --parsable --wait --output=run2/logs/merge-second.log "$slurm_dir/merge.sh" run2 4 >/dev/null ||
  fail "merge after the rerun failed: $(cat run2/logs/merge-second.log)"
same run2/reco.csv

# 3. submit.sh: array and dependent merge in one command.
out=$("$slurm_dir/submit.sh" 4 "$work/run3" "${inputs[@]}" -- "${opts[@]}")
say "submit.sh: $out"
merge_job=$(echo "$out" | sed -n 's/.*merge job \([0-9]*\).*/\1/p')
for i in $(seq 240); do
  [ -z "$(squeue -h -j "$merge_job" 2>/dev/null)" ] && break
  [ "$i" = 240 ] && fail "merge job $merge_job still queued after 120 s: $(squeue)"
  sleep 0.5
done
[ -f run3/reco.csv ] || fail "submit.sh's merge wrote nothing: $(cat run3/logs/*.log)"
same run3/reco.csv
"$quarry" merge --check run3/parts/reco-*.csv

stop_local_slurm
say "daemons stopped; Slurm workflow checks passed"
