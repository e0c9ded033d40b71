#!/usr/bin/env bash
# Through the command: two runs with one seed give bit-identical generators, and 100 steps,
# a stop, `spar resume` and 100 more give the same generator as 200 steps straight. The files
# differ only in the records naming the run (run.id) and timing it (elapsed_ms).
# Usage: resume_matches_straight.sh SPAR SCRATCH
set -euo pipefail
spar=$1 scratch=$2
same="/usr/bin/python3 $(cd "$(dirname "$0")" && pwd)/same_records.py"
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch"
settings=(--set model.width=32 --set training.batch=64 --set output.checkpoint_every=30)
"$spar" train ring8 --out straight --steps 200 --seed 5 --quiet "${settings[@]}"
"$spar" train ring8 --out again --steps 200 --seed 5 --quiet "${settings[@]}"
$same straight/generator.spar again/generator.spar
$same straight/state.spar again/state.spar
# ...and they are two runs: their ids differ.
! cmp -s straight/generator.spar again/generator.spar
"$spar" train ring8 --out split --steps 100 --seed 5 --quiet "${settings[@]}"
"$spar" resume split --steps 200 --quiet
$same straight/generator.spar split/generator.spar
$same straight/state.spar split/state.spar
cmp <(cut -d, -f1,3- straight/log.csv) <(cut -d, -f1,3- split/log.csv)  # all but the seconds
# A different seed gives a different generator (so the comparisons above can fail).
"$spar" train ring8 --out other --steps 200 --seed 6 --quiet "${settings[@]}"
! $same straight/generator.spar other/generator.spar >/dev/null
echo "resume and determinism: identical generators"
