#!/usr/bin/env bash
# What a run folder promises, through the command (docs/reliability.md): demo follows train's
# rule for occupied folders and --force removes only what a run writes; a run resumes and is
# judged from any directory; two writers of one folder never both run; numerical trouble
# stops a run naming what went bad, or warns.
# Usage: run_folders.sh SPAR SCRATCH
set -uo pipefail
spar=$1 scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
scratch=$(pwd)
failures=0
fail() {
  echo "FAIL $*"
  failures=$((failures + 1))
}
small=(--set model.width=16 --quiet)

# demo into a folder holding a run of another kind: refused, the run untouched.
"$spar" train ring8 --out earlier --steps 20 "${small[@]}" || exit 1
echo "mine" >earlier/notes.txt
before=$(cat earlier/generator.spar earlier/recipe.toml | md5sum)
"$spar" demo --out earlier --steps 2 --quiet 2>err.txt
code=$?
[ $code -eq 2 ] && grep -q "earlier: is not empty" err.txt && [ "$(wc -l <err.txt)" -eq 1 ] ||
  fail "demo into an occupied folder: exit $code, $(cat err.txt)"
[ "$(cat earlier/generator.spar earlier/recipe.toml | md5sum)" = "$before" ] ||
  fail "demo changed the run it refused"
# With --force it replaces the run, and only the run.
"$spar" demo --out earlier --steps 2 --force --quiet >/dev/null || fail "demo --force"
[ "$(cat earlier/notes.txt 2>/dev/null)" = "mine" ] || fail "demo --force removed notes.txt"
grep -q 'source = "swatches"' earlier/recipe.toml || fail "demo --force did not write its run"

# A recipe in another folder with a relative data path; then resume and evaluate from /.
mkdir -p data recipes
for i in $(seq 0 63); do echo "$((i % 7)),$((i % 5)),$((i % 3))"; done >data/points.csv
printf '[data]\nsource = "table"\npath = "../data/points.csv"\n[model]\nkind = "mlp"\n' >recipes/table.toml
printf 'width = 8\nlatent = 4\n[training]\nbatch = 8\n' >>recipes/table.toml
(cd recipes && "$spar" train table.toml --out ../table-run --steps 10 --quiet) || fail "train from recipes/"
grep -q "path = \"$scratch/data/points.csv\"" table-run/recipe.toml ||
  fail "data.path not stored absolute: $(grep '^path' table-run/recipe.toml)"
(cd / && "$spar" resume "$scratch/table-run" --steps 20 --quiet) || fail "resume from /"
(cd / && "$spar" evaluate "$scratch/table-run" >/dev/null) || fail "evaluate from /"
mv data/points.csv data/elsewhere.csv
(cd / && "$spar" resume "$scratch/table-run" --steps 30 --quiet) 2>err.txt
code=$?
[ $code -eq 2 ] && grep -q "data.path: \"$scratch/data/points.csv\" does not exist" err.txt ||
  fail "moved data: exit $code, $(cat err.txt)"

# Two writers of one new folder, ten times: never both.
for trial in $(seq 1 10); do
  rm -rf race
  "$spar" train ring8 --out race --steps 200 "${small[@]}" 2>race-a.txt &
  a=$!
  "$spar" train ring8 --out race --steps 200 "${small[@]}" 2>race-b.txt &
  b=$!
  wait $a
  ca=$?
  wait $b
  cb=$?
  if ! { [ $ca -eq 0 ] && [ $cb -eq 2 ]; } && ! { [ $ca -eq 2 ] && [ $cb -eq 0 ]; }; then
    fail "race $trial: exits $ca and $cb: $(cat race-a.txt race-b.txt)"
  fi
  grep -hq "is writing this run\|is not empty" race-a.txt race-b.txt || fail "race $trial: no refusal text"
  [ "$(grep -c '^200,' race/log.csv)" -eq 1 ] || fail "race $trial: log.csv holds two runs"
done
# --force does not take a folder from a live writer.
"$spar" train ring8 --out held --steps 1000000 "${small[@]}" &
holder=$!
for _ in $(seq 100); do [ -s held/run.lock ] && [ -e held/state.spar ] && break; sleep 0.05; done
"$spar" train ring8 --out held --steps 10 --force "${small[@]}" 2>err.txt
code=$?
[ $code -eq 2 ] && grep -q "(process $holder) is writing this run" err.txt ||
  fail "--force on a held folder: exit $code, $(cat err.txt)"
kill -INT $holder
wait $holder
"$spar" resume held --steps 10 --quiet 2>/dev/null
[ $? -eq 0 ] || fail "resume after the holder stopped"

# Numerical trouble. Least-squares targets of 1e30 overflow float32: exit 1 naming the loss
# and the kept checkpoint's step.
"$spar" train ring8 --out lsq --steps 50 "${small[@]}" --set objective.name=least-squares \
  --set objective.least_squares_real=1e30 2>err.txt
code=$?
[ $code -eq 1 ] && grep -qF "step 1: the critic loss is inf; the last good checkpoint (step 0) is kept in lsq" err.txt ||
  fail "least squares 1e30: exit $code, $(cat err.txt)"
# A learning rate of 1.0: one warning line, and the run goes on.
"$spar" train ring8 --out hot --steps 100 "${small[@]}" --set generator_optimiser.learning_rate=1.0 \
  --set critic_optimiser.learning_rate=1.0 2>err.txt
code=$?
{ [ $code -eq 0 ] || [ $code -eq 1 ]; } && [ "$(grep -c 'warning: .* training looks divergent' err.txt)" -eq 1 ] ||
  fail "learning rate 1.0: exit $code, $(cat err.txt)"

[ $failures -eq 0 ] && echo "run folders: every promise kept" || exit 1
