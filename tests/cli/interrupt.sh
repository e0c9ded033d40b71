#!/usr/bin/env bash
# Ctrl-C (SIGINT) during training leaves a loadable state.spar, exit code 130, and
# `spar resume` continues from it. SIGTERM does the same with exit code 143 (128 + 15, as a
# shell reports a process ended by SIGTERM).
# Usage: interrupt.sh SPAR SCRATCH
set -euo pipefail
spar=$1 scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch"
step_of() { "$spar" inspect "$1" | sed -n 's/.*, step \([0-9]*\)$/\1/p'; }
for signal in INT TERM; do
  expected=$([ "$signal" = INT ] && echo 130 || echo 143)
  rm -rf run
  "$spar" train ring8 --out run --steps 100000000 --quiet --set output.checkpoint_every=1000000 \
    2>stderr.txt &
  pid=$!
  # Wait until training is under way (the first rows are logged), then interrupt.
  for _ in $(seq 200); do
    [ "$(wc -l 2>/dev/null < run/log.csv || echo 0)" -ge 3 ] && break
    sleep 0.1
  done
  kill -"$signal" "$pid"
  code=0
  wait "$pid" || code=$?
  [ "$code" -eq "$expected" ] ||
    { echo "SIG$signal: exit code $code, expected $expected"; cat stderr.txt; exit 1; }
  grep -q "stopped at step" stderr.txt
  step=$(step_of run/state.spar)
  [ -n "$step" ] && [ "$step" -gt 0 ] || { echo "SIG$signal: no step in state.spar"; exit 1; }
  [ "$(step_of run/generator.spar)" -eq "$step" ]
  "$spar" resume run --steps $((step + 50)) --quiet
  [ "$(step_of run/generator.spar)" -eq $((step + 50)) ]
  echo "SIG$signal at step $step: exit $code, state saved, resumed to $((step + 50))"
done
