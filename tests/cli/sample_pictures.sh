#!/usr/bin/env bash
# The pictures spar writes decode with an independent decoder (tests/reference/png_size.py,
# written from the PNG specification on python's zlib) with the size and channel count the
# layout promises: run-folder grids, `spar sample -o` grids, `--into` single pictures, 2-D
# scatter plots and table rows drawn as pictures.
# Usage: sample_pictures.sh SPAR PNG_SIZE_SCRIPT SCRATCH
set -euo pipefail
spar=$1 png_size=$2 scratch=$3
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch"
failures=0
expect_size() {  # FILE "W H C"
  local got
  got=$(/usr/bin/python3 "$png_size" "$1")
  if [ "$got" != "$2" ]; then
    echo "FAIL $1: decoded as '$got', expected '$2'"
    failures=$((failures + 1))
  else
    echo "ok   $1: $got"
  fi
}
small=(--set model.width=4 --set model.latent=8 --set training.batch=8 --set data.swatch_count=32)
"$spar" train swatches --out sw --steps 2 --quiet "${small[@]}" --set output.sample_count=10
# 10 RGB 32x32 tiles shown twice as large (64 px) in ceil(sqrt(10)) = 4 columns and 3 rows,
# with 2-pixel gaps: 4·64 + 5·2 by 3·64 + 4·2.
expect_size sw/samples/step-000002.png "266 200 3"
"$spar" sample sw -n 6 -o six.png
expect_size six.png "200 134 3"  # 3 columns, 2 rows: 3·64 + 4·2 by 2·64 + 3·2
"$spar" sample sw -n 3 --into singles
for f in singles/sample-00000.png singles/sample-00002.png; do expect_size "$f" "32 32 3"; done
"$spar" train swatches-conditional --out swc --steps 2 --quiet "${small[@]}" --set output.sample_count=16
# One column per family (8), 2 rows.
expect_size swc/samples/step-000002.png "530 134 3"
"$spar" sample swc --class dots -n 4 -o dots.png
expect_size dots.png "134 134 3"
"$spar" train ring8 --out ring --steps 2 --quiet
expect_size ring/samples/step-000002.png "512 512 3"
"$spar" train digits --out digits --steps 2 --quiet --set output.sample_count=4
# Rows of 64 values drawn 8 wide, enlarged 8 times (64 px), gray: 2 columns, 2 rows.
expect_size digits/samples/step-000002.png "134 134 1"
[ "$failures" -eq 0 ] && echo "every picture decodes with the promised size"
exit "$failures"
