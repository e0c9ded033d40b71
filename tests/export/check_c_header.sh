#!/usr/bin/env bash
# `spar export --c-header` end to end, for every generator spar builds (shortened runs of the
# presets' architectures): the mlp for points and for a class-conditional table (digits), and
# the DCGAN-style ones at 28 px grayscale, 32 px RGB class-conditional and 64 px RGB:
#   - the header compiles, with two translation units (only one defines the implementation),
#     as C99 (-std=c99 -pedantic), C11 and C++17, with gcc and clang, at -O0 and -O2, all with
#     -Wall -Wextra -Werror, and once more under UBSan (-fsanitize=undefined, any report fatal);
#   - every build's latent vectors equal spar's own draw bit for bit (spar_latent_dump), and
#     its samples equal `spar sample -o FILE.csv` within 1e-5 on every value (numpy);
#   - bad input is refused with one line and exit 2, writing nothing.
# Usage: check_c_header.sh SPAR LATENT_DUMP SCRATCH
set -uo pipefail
spar=$1 dump=$2 scratch=$3
here=$(cd "$(dirname "$0")" && pwd)
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
failures=0 builds=0
fail() {
  echo "FAIL: $*"
  failures=$((failures + 1))
}
close() {  # samples within 1e-5 of spar's, value for value
  /usr/bin/python3 - "$1" "$2" <<'PYTHON'
import sys
import numpy as np
a, b = (np.atleast_2d(np.loadtxt(p, delimiter=",")) for p in sys.argv[1:3])
ok = a.shape == b.shape and np.abs(a - b).max() <= 1e-5
print(f"shape {a.shape}, largest difference {np.abs(a - b).max() if a.shape == b.shape else 'n/a'}")
sys.exit(0 if ok else 1)
PYTHON
}

compilers=() seen=" "
for c in gcc clang-14 clang; do  # each compiler once (clang may be clang-14)
  real=$(readlink -f "$(command -v "$c" 2>/dev/null)" 2>/dev/null) || continue
  [[ "$seen" == *" $real "* ]] && continue
  seen+="$real " compilers+=("$c")
done
cxx_of() { case $1 in gcc) echo g++ ;; clang-14) echo clang++-14 ;; clang) echo clang++ ;; esac; }

check_run() {
  local name=$1 run=$2
  "$spar" export "$run" --c-header "$name/gen.h" >/dev/null || { fail "$name: export"; return; }
  "$dump" "$run" 11 9 >"$name/latents-spar.txt" || fail "$name: latent dump"
  "$spar" sample "$run" -n 9 --seed 11 -o "$name/samples-spar.csv" >/dev/null || fail "$name: sample"
  for cc in "${compilers[@]}"; do
    for std in c99 c11 c++17; do
      for opt in -O0 -O2; do
        local tag="$name/$cc-$std$opt" compiler=$cc flags=(-std="$std" -Wall -Wextra -Werror)
        if [ "$std" = c++17 ]; then
          compiler=$(cxx_of "$cc")
          flags+=(-x c++)
        else
          flags+=(-pedantic)
        fi
        builds=$((builds + 1))
        if ! "$compiler" "${flags[@]}" "$opt" -I"$name" "$here/use_header.c" "$here/second_unit.c" \
          -o "$tag" -lm 2>"$tag.log"; then
          fail "$tag: does not compile: $(head -3 "$tag.log" | tr '\n' '|')"
          continue
        fi
        "$tag" 11 9 "$tag.latents" "$tag.csv" || { fail "$tag: exit $?"; continue; }
        cmp -s "$tag.latents" "$name/latents-spar.txt" || fail "$tag: latent vectors differ from spar's"
        close "$tag.csv" "$name/samples-spar.csv" >"$tag.close" || fail "$tag: $(cat "$tag.close")"
      done
    done
  done
  # Undefined behaviour: any report ends the program.
  local tag="$name/ubsan"
  builds=$((builds + 1))
  if gcc -std=c99 -Wall -Wextra -Werror -O1 -fsanitize=undefined -fno-sanitize-recover=all \
    -I"$name" "$here/use_header.c" "$here/second_unit.c" -o "$tag" -lm 2>"$tag.log"; then
    "$tag" 11 9 "$tag.latents" "$tag.csv" 2>"$tag.err" || fail "$tag: $(head -2 "$tag.err")"
  else
    fail "$tag: does not compile: $(head -3 "$tag.log" | tr '\n' '|')"
  fi
  echo "$name: $(cat "$name/gcc-c99-O2.close" 2>/dev/null)"
}

mkdir -p ring8 table
"$spar" train ring8 --out ring8/run --steps 30 --quiet --set model.width=16 || fail "train ring8"
check_run ring8 ring8/run
"$spar" train digits --out table/run --steps 20 --quiet --set model.width=32 --set model.latent=8 \
  --set model.conditional=true --set output.sample_every=10 || fail "train the digits table"
check_run table table/run
grep -q "GEN_CLASSES 10" table/gen.h || fail "the conditional header does not say 10 classes"
# The DCGAN-style generators, small: 28 px grayscale (Fashion-MNIST), 32 px RGB
# class-conditional (the swatch families), 64 px RGB.
small=(--quiet --set model.width=4 --set model.latent=8 --set training.batch=8)
mkdir -p fashion28 swatches32 swatches64
"$spar" train fashion --out fashion28/run --steps 3 "${small[@]}" || fail "train fashion"
check_run fashion28 fashion28/run
"$spar" train swatches-conditional --out swatches32/run --steps 3 "${small[@]}" \
  --set data.swatch_count=64 || fail "train swatches-conditional"
check_run swatches32 swatches32/run
"$spar" train swatches --out swatches64/run --steps 2 "${small[@]}" --set data.image_size=64 \
  --set data.swatch_count=16 || fail "train swatches at 64 px"
check_run swatches64 swatches64/run

# The README's example, as written, against a header exported under its names.
readme=$here/../../README.md
sed -n '/<!-- export example -->/,/^```$/p' "$readme" | sed '1,2d;$d' >readme_example.c
cp -r ring8/run trained_ring8
"$spar" export trained_ring8 --c-header ring8.h --prefix ring8 >/dev/null || fail "export for the README"
if gcc -std=c99 -Wall -Wextra -Werror -pedantic -O2 -I. readme_example.c -o readme_example -lm \
  2>readme.log; then
  "$spar" sample trained_ring8 -n 1 --seed 7 -o readme_spar.csv >/dev/null
  ./readme_example >readme_out.csv
  close readme_out.csv readme_spar.csv >readme.close || fail "the README's example: $(cat readme.close)"
else
  fail "the README's example does not compile: $(head -3 readme.log | tr '\n' '|')"
fi

# Bad input: one line, exit 2, nothing written.
refuse() {
  local what=$1
  shift
  "$spar" export "$@" >out.txt 2>err.txt
  local code=$?
  if [ "$code" -ne 2 ] || [ "$(wc -l <err.txt)" -ne 1 ]; then
    fail "$what: exit $code, stderr: $(tr '\n' '|' <err.txt)"
  fi
  [ ! -e refused.h ] || { fail "$what: wrote refused.h"; rm -f refused.h; }
}
printf 'not a checkpoint' >junk.spar
head -c 100 ring8/run/generator.spar >cut.spar
mkdir -p empty-run
refuse "a file that is not a generator" junk.spar --c-header refused.h
refuse "a truncated generator" cut.spar --c-header refused.h
refuse "a run folder without generator.spar" empty-run --c-header refused.h
refuse "a state.spar instead of a generator" ring8/run/state.spar --c-header refused.h
refuse "a prefix that is not a C identifier" ring8/run --c-header refused.h --prefix 9lives
refuse "an output in a missing folder" ring8/run --c-header no/such/folder/refused.h
# A generator whose tensors are not the architecture its recipe names: refused by name.
cp -r ring8/run alien
/usr/bin/python3 - alien/generator.spar <<'PYTHON' || fail "could not make the alien generator"
import struct, sys, zlib
path = sys.argv[1]
data = bytearray(open(path, "rb").read())
old, new = b"generator/out/matrix", b"generator/odd/matrix"
at = data.find(old)
if at < 0:
    sys.exit(1)
data[at:at + len(old)] = new.ljust(len(old), b"x")  # same length, so the record layout holds
# The record's CRC covers kind..payload; recompute it: walk to the record's start and end.
pos = 24
while pos < len(data):
    start = pos
    kind = data[pos]; name_len = struct.unpack_from("<H", data, pos + 1)[0]; pos += 3 + name_len
    if kind in (1, 2):
        rank = data[pos]; pos += 1 + 8 * rank
    payload = struct.unpack_from("<Q", data, pos)[0]; pos += 8 + payload
    if start <= at < pos:
        struct.pack_into("<I", data, pos, zlib.crc32(bytes(data[start:pos])) & 0xFFFFFFFF)
    pos += 4
open(path, "wb").write(bytes(data))
PYTHON
refuse "a generator whose tensors its recipe does not describe" alien --c-header refused.h

if [ "$failures" -ne 0 ]; then
  echo "$failures failures in $builds builds"
  exit 1
fi
echo "the header compiled and matched spar in $builds builds; bad input refused"
