#!/usr/bin/env bash
# Byte-identity check for refactors and speed work: the reconstruction output
# of every preset on all demo events, with and without --fit, with
# --btag-mode weighted and with --max-jets 8 --best 5, must not change unless
# an issue asks for it. The expected SHA-256 of each output is committed in
# scripts/byte-identity.sha256; `--record` rewrites that file (only do that
# in a commit whose message says which output changed and why).
#
# Usage: scripts/byte-identity.sh [--record] [path/to/quarry]
set -euo pipefail
cd "$(dirname "$0")/.."
record=0
if [ "${1:-}" = "--record" ]; then record=1; shift; fi
bin=${1:-target/release/quarry}
if [ $# -eq 0 ]; then cargo build --release --quiet --bin quarry; fi
sums=scripts/byte-identity.sha256
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
inputs=(demo-events/*.csv.gz)
presets=$("$bin" presets list | awk '{print $1}')
variants=("plain:" "fit:--fit" "weighted:--btag-mode weighted" "weighted-fit:--btag-mode weighted --fit" "max8best5:--max-jets 8 --best 5" "max8best5-fit:--max-jets 8 --best 5 --fit")
for p in $presets; do
  for v in "${variants[@]}"; do
    name=${v%%:*}; opts=${v#*:}
    # shellcheck disable=SC2086
    "$bin" reco "${inputs[@]}" -H "$p" $opts -j 2 -q --no-progress -o "$out/$p.$name.csv"
  done
done
# All presets at once, in a non-alphabetical order, with and without the fit.
"$bin" reco "${inputs[@]}" -H twtw-ljets -H ttbar-ljets -H bz-2l -j 2 -q --no-progress -o "$out/three.plain.csv"
"$bin" reco "${inputs[@]}" -H twtw-ljets -H ttbar-ljets -H bz-2l --fit -j 2 -q --no-progress -o "$out/three.fit.csv"
(cd "$out" && sha256sum -- *.csv | LC_ALL=C sort -k2) > "$out/now.sha256"
if [ "$record" = 1 ]; then
  cp "$out/now.sha256" "$sums"
  echo "recorded $(wc -l < "$sums") outputs in $sums"
  exit 0
fi
if diff -u "$sums" "$out/now.sha256"; then
  echo "byte-identity: all $(wc -l < "$sums") outputs identical"
else
  echo "byte-identity: outputs differ (lines above: - expected, + now)" >&2
  exit 1
fi
