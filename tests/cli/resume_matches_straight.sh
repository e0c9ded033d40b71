#!/usr/bin/env bash
# Through the command: two runs with one seed give bit-identical generators, and 100 steps,
# a stop, `spar resume` and 100 more give the same generator as 200 steps straight.
# Usage: resume_matches_straight.sh SPAR SCRATCH
set -euo pipefail
spar=$1 scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch"
settings=(--set model.width=32 --set training.batch=64 --set output.checkpoint_every=30)
"$spar" train ring8 --out straight --steps 200 --seed 5 --quiet "${settings[@]}"
"$spar" train ring8 --out again --steps 200 --seed 5 --quiet "${settings[@]}"
cmp straight/generator.spar again/generator.spar
"$spar" train ring8 --out split --steps 100 --seed 5 --quiet "${settings[@]}"
"$spar" resume split --steps 200 --quiet
cmp straight/generator.spar split/generator.spar
cmp <(cut -d, -f1,3- straight/log.csv) <(cut -d, -f1,3- split/log.csv)  # all but the seconds
# A different seed gives a different generator (so the comparisons above can fail).
"$spar" train ring8 --out other --steps 200 --seed 6 --quiet "${settings[@]}"
! cmp -s straight/generator.spar other/generator.spar
echo "resume and determinism: identical generators"
