#!/usr/bin/env bash
# A run folder written in run format 1 (dotted record names such as critic.down2.weight, and
# the recipe key model.spectral_norm) still samples, resumes and shows its records, with the
# numbers the spar that wrote it gave (to the last printed digit; see same_numbers). tests/data/run-format-1 was written by spar at commit
# cdb74a2, the last one with format 1, with:
#   spar train swatches-conditional --out run --steps 3 --threads 1 --set data.image_size=28
#     --set model.width=4 --set model.latent=8 --set model.spectral_norm=true
#     --set data.swatch_count=64 --set training.batch=8 --set output.sample_count=8
#     --set output.checkpoint_every=3 --set output.log_every=1 --set output.sample_every=3
#     --set objective.name=hinge
# (a conditional DCGAN: convolutions, transposed convolutions, batch normalisation's running
# statistics and spectral normalisation's vectors all have records), then, by the same spar:
#   samples-step3.csv: spar sample run -n 2 --seed 3 -o samples-step3.csv
#   samples-step5.csv: the same after spar resume run --steps 5 (in a copy of the folder)
# Usage: old_run_format.sh SPAR SCRATCH
set -uo pipefail
spar=$1 scratch=$2
here=$(cd "$(dirname "$0")" && pwd)
fixture=$here/../data/run-format-1
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
failures=0
fail() {
  echo "FAIL: $*"
  failures=$((failures + 1))
}
# The same numbers as the format-1 spar's, to 1e-5: the fixture was written by a Release build
# with -march=native, and another instruction set or optimisation level (the sanitizer build's
# -O1) rounds sums differently in the last printed digit (measured: at most 1e-6). A record
# given to the wrong tensor would move the samples by far more, or fail to load at all.
same_numbers() {
  /usr/bin/python3 - "$1" "$2" <<'PYTHON'
import sys
import numpy as np
a, b = (np.loadtxt(p, delimiter=",") for p in sys.argv[1:3])
sys.exit(0 if a.shape == b.shape and np.abs(a - b).max() <= 1e-5 else 1)
PYTHON
}

cp -r "$fixture" run
# Samples from the format-1 generator.spar, as the old spar drew them.
"$spar" sample run -n 2 --seed 3 -o step3.csv >/dev/null || fail "sample of the old generator"
same_numbers step3.csv "$fixture/samples-step3.csv" || fail "samples differ from the old spar's (step 3)"

# inspect shows the records under their current names, and says the file is older.
"$spar" inspect run/state.spar >inspect.txt || fail "inspect of the old state"
grep -q 'written in run format 1' inspect.txt || fail "inspect does not say the format is 1"
for name in generator/up1/filters generator/norm0/population_mean critic/score/matrix \
  critic/down1/singular_left critic/down2/offset average/generator/project/matrix \
  optimiser/critic/m/0; do
  grep -q "^$name " inspect.txt || fail "inspect does not show $name"
done
if grep -q -E '\.(weight|bias|running_mean|running_variance|spectral_u|spectral_v) ' inspect.txt; then
  fail "inspect shows format-1 names"
fi

# Format-1 mlp generators (the fuzz seeds written by the format-1 spar: points and a
# conditional table) load: every record must map to a tensor of today's networks, or
# load_generator refuses the file naming the first one that does not.
corpus=$here/../fuzz/corpus/generator
for old in points-format-1.spar table_conditional-format-1.spar; do
  "$spar" sample "$corpus/$old" -n 4 --seed 2 -o "${old%.spar}.csv" >/dev/null 2>err.txt ||
    fail "sample of the format-1 generator $old: $(cat err.txt)"
done

# Resuming continues the old run exactly; the new checkpoints are in the current format.
"$spar" resume run --steps 5 --quiet || fail "resume of the old run"
"$spar" sample run -n 2 --seed 3 -o step5.csv >/dev/null || fail "sample after resume"
same_numbers step5.csv "$fixture/samples-step5.csv" || fail "samples differ from the old spar's (step 5)"
"$spar" inspect run/generator.spar >after.txt || fail "inspect after resume"
grep -q 'written in run format' after.txt && fail "the resumed run still writes format 1"
grep -q '^run.format  *int64  *2' after.txt || fail "the resumed run's generator.spar has no run.format 2"
grep -q '^spectral_normalisation = true' run/recipe.toml ||
  fail "recipe.toml does not use the new key name after resume"

if [ "$failures" -ne 0 ]; then
  echo "$failures failures"
  exit 1
fi
echo "the format-1 run sampled, showed its records and resumed to the old spar's numbers"
