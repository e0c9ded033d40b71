#!/usr/bin/env bash
# Resident memory of a training run through the spar command, sampled once a second from
# /proc while it trains: the figure at the first sample past each thousand steps and the peak
# (VmHWM). Flat memory means the figures past step 1,000 stay equal.
# Usage: benchmarks/training_memory.sh [preset] [steps] [spar binary] [extra train options...]
set -euo pipefail
calc() { awk "BEGIN { print $1 }"; }  # arithmetic without bc
preset=${1:-fashion}
steps=${2:-10000}
spar=${3:-$(dirname "$0")/../build/cli/spar}
shift $(($# < 3 ? $# : 3))
scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT
"$spar" train "$preset" --out "$scratch/run" --steps "$steps" --quiet \
  --set output.log_every=10 --set training.batch=64 "$@" &
pid=$!
next=1000 peak=0
while kill -0 "$pid" 2>/dev/null; do
  rss=$(awk '/^VmRSS/ {print $2}' /proc/$pid/status 2>/dev/null || true)
  hwm=$(awk '/^VmHWM/ {print $2}' /proc/$pid/status 2>/dev/null || true)
  [ -n "$hwm" ] && peak=$hwm
  step=$(tail -n 1 "$scratch/run/log.csv" 2>/dev/null | cut -d, -f1 || true)
  if [ -n "$rss" ] && [[ "$step" =~ ^[0-9]+$ ]] && [ "$step" -ge "$next" ]; then
    printf 'step %6d: resident %7.1f MiB\n' "$step" "$(calc "$rss / 1024")"
    next=$((next + 1000))
  fi
  sleep 1
done
wait "$pid"
printf 'peak resident memory (VmHWM): %.1f MiB\n' "$(calc "$peak / 1024")"
