#!/bin/bash
# The README's scaling figure, on a private single-node Slurm (2 CPUs):
# one input reconstructed as 1 shard and as 4 shards of 1 CPU each, then
# the 4 shards merged under /usr/bin/time -v. Prints the array's wall time
# (first shard's start to last shard's end, from the manifests; and the
# time `sbatch --wait` took, which adds Slurm's scheduling and polling), the
# shards' own times, the merge's time and peak memory, and checks the merge
# against the 1-shard output byte for byte.
#
#   quarry generate --process ttbar -n 1500000 --seed 11 -o big.csv
#   batch/slurm/scaling.sh big.csv [QUARRY_BINARY] [RECO-OPTIONS...]
#
# Default options: -H ttbar-ljets. Needs root (see local-slurm.sh).
set -euo pipefail
started=$EPOCHREALTIME
repo=$(cd "$(dirname "$0")/../.." && pwd)
slurm_dir="$repo/batch/slurm"
input=$(realpath "$1")
quarry=$(realpath "${2:-$repo/target/release/quarry}")
shift $(($# >= 2 ? 2 : 1))
opts=("$@")
[ ${#opts[@]} -gt 0 ] || opts=(-H ttbar-ljets)
elapsed() { awk -v a="$started" -v b="$EPOCHREALTIME" 'BEGIN { printf "%.1f", b - a }'; }
say() { printf '[scaling %6ss] %s\n' "$(elapsed)" "$*"; }
fail() { say "FAILED: $*"; exit 1; }

state=$(mktemp -d /tmp/quarry-slurm-scaling.XXXXXX)
chmod 755 "$state"
# shellcheck source=batch/slurm/local-slurm.sh
. "$slurm_dir/local-slurm.sh"
trap 'stop_local_slurm; rm -rf "$state"' EXIT
start_local_slurm "$state"
export QUARRY="$quarry"
cd "$state"

# Wall time of a finished array from its shards' manifests.
span() {
  python3 - "$@" <<'PY'
import json, sys, datetime
ms = [json.load(open(p)) for p in sys.argv[1:]]
t = lambda s: datetime.datetime.strptime(s, "%Y-%m-%dT%H:%M:%S.%fZ").timestamp()
wall = max(t(m["ended"]) for m in ms) - min(t(m["started"]) for m in ms)
shards = ", ".join("%.1f" % m["wall_time_s"] for m in ms)
print(f"{wall:.1f} s from first start to last end; shards {shards} s; "
      f"{ms[0]['events_read']} events, {sum(m['rows_written'] for m in ms)} rows")
PY
}

say "input: $input ($(du -h "$input" | cut -f1)), options: ${opts[*]}"
for n in 1 4; do
  t0=$EPOCHREALTIME
  sbatch --wait --quiet --array=0-$((n - 1)) --cpus-per-task=1 --output="$state/n$n-%a.log" \
    "$slurm_dir/reco-array.sh" "n$n" "$input" -- "${opts[@]}" || fail "array N=$n: $(cat "$state"/n$n-*.log)"
  t1=$EPOCHREALTIME
  say "N=$n x 1 CPU: $(span n$n/parts/reco-*.csv.manifest.json); sbatch --wait returned after $(awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.1f", b - a }') s"
done
/usr/bin/time -v "$quarry" merge n4/parts/reco-{0,1,2,3}.csv -o n4/reco.csv 2>merge.time
grep -E "quarry merge:" merge.time
say "merge of 4 shards: $(awk -F': ' '/Elapsed \(wall clock\)/ {w=$2} /Maximum resident/ {m=$2} END {printf "wall %s (h:mm:ss), peak resident memory %.1f MB", w, m / 1024}' merge.time)"
cmp n4/reco.csv n1/parts/reco-0.csv || fail "the merge differs from the 1-shard output"
say "merged output is byte-identical to the 1-shard output ($(du -h n4/reco.csv | cut -f1))"
