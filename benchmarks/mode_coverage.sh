#!/usr/bin/env bash
# Mode coverage of a preset on the built-in 2-D mixtures, averaged over seeds, through the
# spar command itself: `spar train PRESET --seed S` then `spar evaluate` (Srivastava et al.
# 2017's protocol: 2,500 samples, high quality within 3σ of the nearest mode; data of Lin et
# al. 2018). Prints one line per seed and the average.
# Usage: benchmarks/mode_coverage.sh [ring8|grid25] [seeds] [spar binary] [extra train options...]
set -euo pipefail
calc() { awk "BEGIN { print $1 }"; }  # arithmetic without bc
preset=${1:-ring8}
seeds=${2:-5}
spar=${3:-$(dirname "$0")/../build/cli/spar}
shift $(($# < 3 ? $# : 3))
scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT
total_modes=0 total_quality=0 total_seconds=0
for seed in $(seq "$seeds"); do
  start=$(date +%s.%N)
  "$spar" train "$preset" --out "$scratch/seed$seed" --seed "$seed" --quiet "$@"
  seconds=$(calc "$(date +%s.%N) - $start")
  json=$("$spar" evaluate "$scratch/seed$seed" --json)
  modes=$(echo "$json" | sed 's/.*"modes_captured": \([0-9]*\).*/\1/')
  of=$(echo "$json" | sed 's/.*"modes_total": \([0-9]*\).*/\1/')
  quality=$(echo "$json" | sed 's/.*"high_quality_fraction": \([0-9.e-]*\).*/\1/')
  printf '%s seed %d: %d of %d modes, %.1f%% high quality, %.0f s\n' "$preset" "$seed" "$modes" \
    "$of" "$(calc "100 * $quality")" "$seconds"
  total_modes=$(calc "$total_modes + $modes")
  total_quality=$(calc "$total_quality + $quality")
  total_seconds=$(calc "$total_seconds + $seconds")
done
printf '%s, mean of %d seeds: %.2f of %d modes, %.1f%% high quality, %.0f s per run\n' "$preset" \
  "$seeds" "$(calc "$total_modes / $seeds")" "$of" \
  "$(calc "100 * $total_quality / $seeds")" "$(calc "$total_seconds / $seeds")"
