#!/usr/bin/env bash
# Bad input gives one line on stderr naming the culprit, exit code 2, and overwrites nothing.
# Usage: bad_inputs.sh SPAR SCRATCH
set -uo pipefail
spar=$1 scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
failures=0
# expect_error WHAT EXPECTED-TEXT COMMAND...: exit code 2 and one stderr line holding the text.
expect_error() {
  local what=$1 text=$2
  shift 2
  "$@" >stdout.txt 2>stderr.txt
  local code=$?
  local lines
  lines=$(wc -l <stderr.txt)
  if [ "$code" -ne 2 ] || [ "$lines" -ne 1 ] || ! grep -qF -- "$text" stderr.txt; then
    echo "FAIL $what: exit $code, $lines stderr lines, expected '$text' in:"
    cat stderr.txt
    failures=$((failures + 1))
  else
    echo "ok   $what: $(cat stderr.txt)"
  fi
}

"$spar" train ring8 --out good --steps 20 --quiet --set model.width=16 || exit 1
cp good/generator.spar reference.spar

# Recipes.
printf '[training]\nstpes = 5\n' >typo.toml
expect_error "unknown recipe key" "typo.toml:2: training.stpes: unknown key; did you mean 'training.steps'?" \
  "$spar" train typo.toml --out r1
printf '[training]\nsteps = "five"\n' >type.toml
expect_error "value of the wrong type" "type.toml:2: training.steps: must be an integer" \
  "$spar" train type.toml --out r2
expect_error "--set of the wrong type" "training.batch: must be an integer" \
  "$spar" train ring8 --out r3 --set training.batch=lots
expect_error "unknown preset" "no-such-preset: neither a preset" "$spar" train no-such-preset --out r4
[ ! -e r1 ] && [ ! -e r2 ] && [ ! -e r3 ] && [ ! -e r4 ] || { echo "FAIL: a refused run left a folder"; failures=$((failures + 1)); }

# Data.
printf '[data]\nsource = "images"\npath = "no-such-folder"\n' >missing.toml
expect_error "data path that does not exist" "no-such-folder" "$spar" train missing.toml --out r5
mkdir -p empty
printf '[data]\nsource = "images"\npath = "empty"\n' >empty.toml
expect_error "folder without images" "empty" "$spar" train empty.toml --out r6
mkdir -p broken
cp good/samples/step-000020.png broken/fine.png
head -c 300 /dev/urandom >broken/corrupt.png
printf '[data]\nsource = "images"\npath = "broken"\n' >broken.toml
expect_error "corrupt image" "corrupt.png" "$spar" train broken.toml --out r7
printf '[data]\nsource = "idx"\npath = "nothing.idx.gz"\n' >idx.toml
expect_error "missing IDX file" "nothing.idx.gz" "$spar" train idx.toml --out r8

# Checkpoints: truncated, flipped bytes; the damaged file is left as it was.
mkdir -p truncated && cp -r good/. truncated/
head -c 1000 good/generator.spar >truncated/generator.spar
cp truncated/generator.spar truncated.copy
expect_error "truncated checkpoint" "truncated/generator.spar" "$spar" sample truncated -o t.png
cmp -s truncated/generator.spar truncated.copy || { echo "FAIL: truncated file changed"; failures=$((failures + 1)); }
head -c 2000 good/state.spar >truncated/state.spar
expect_error "truncated state" "truncated/state.spar" "$spar" resume truncated --steps 40
mkdir -p flipped && cp -r good/. flipped/
size=$(stat -c %s good/generator.spar)
printf '\xff' | dd of=flipped/generator.spar bs=1 seek=$((size / 2)) conv=notrunc status=none
expect_error "flipped bytes" "flipped/generator.spar" "$spar" inspect flipped/generator.spar
expect_error "not a checkpoint" "typo.toml: not a spar archive" "$spar" inspect typo.toml
mkdir -p not-a-run
expect_error "folder without a generator" "not-a-run/generator.spar: does not exist" "$spar" sample not-a-run
expect_error "missing checkpoint" "nothing.spar: does not exist" "$spar" inspect nothing.spar

# An existing run folder is not overwritten without --force.
expect_error "non-empty output folder" "good: is not empty" "$spar" train ring8 --out good --steps 5
cmp -s good/generator.spar reference.spar || { echo "FAIL: refused run changed good/"; failures=$((failures + 1)); }
# Nor with --force when the new run's data cannot be read: the earlier run stays.
expect_error "--force with missing data" "no-such-folder" "$spar" train missing.toml --out good --force
cmp -s good/generator.spar reference.spar || { echo "FAIL: failed --force run changed good/"; failures=$((failures + 1)); }

[ "$failures" -eq 0 ] && echo "all bad inputs refused cleanly"
exit "$failures"
