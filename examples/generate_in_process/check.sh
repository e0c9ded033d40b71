#!/usr/bin/env bash
# ctest: installs the built spar into a scratch prefix, builds this example against it with
# find_package, trains a small run with the spar command, and checks that the example's
# samples are those `spar sample` writes for the same seed, value for value.
# Usage: check.sh SPAR_BUILD_DIR SPAR SCRATCH
set -euo pipefail
build=$1 spar=$2 scratch=$3
here=$(cd "$(dirname "$0")" && pwd)
rm -rf "$scratch" && mkdir -p "$scratch"
cmake --install "$build" --prefix "$scratch/prefix" >/dev/null
cmake -S "$here" -B "$scratch/build" -DCMAKE_PREFIX_PATH="$scratch/prefix" \
  -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$scratch/build" >/dev/null
"$spar" train swatches-conditional --out "$scratch/run" --steps 4 --quiet --threads 1 \
  --set data.image_size=28 --set model.width=4 --set model.latent=8 --set data.swatch_count=64 \
  --set training.batch=8 --set output.checkpoint_every=4
"$scratch/build/generate_in_process" "$scratch/run" 5 7 >"$scratch/example.csv" 2>"$scratch/about.txt"
"$spar" sample "$scratch/run" -n 5 --seed 7 -o "$scratch/spar.csv" >/dev/null
cmp "$scratch/example.csv" "$scratch/spar.csv"
grep -q "step 4, samples of shape \[3, 28, 28\], 8 classes" "$scratch/about.txt"
echo "the example drew the samples spar sample draws"
