#!/usr/bin/env bash
# Fault injection: the disk fills up during each kind of write a run makes. A run that has
# written a checkpoint is resumed with tests/fault/fail_writes.c preloaded, which makes writes
# to one kind of file fail with ENOSPC: the checkpoints (state.spar, generator.spar), a sample
# picture, the log, the curves. Each time the run must stop with exit code 1 and one stderr
# line naming the file, saying the disk is full and naming the step of the checkpoint it kept;
# state.spar and generator.spar must still load and hold the steps they held before (the one
# of the two that was written completely may hold the new step); no temporary file may be
# left; and a later `spar resume` without the injector must finish the run bit for bit as an
# uninterrupted one (generator.spar and state.spar record for record, apart from the run's id
# and the elapsed time; log.csv apart from the seconds; pictures and curves byte for byte;
# recipe.toml apart from its comments, which name the run).
# Usage: disk_full.sh SPAR FAIL_WRITES_LIBRARY SCRATCH
set -uo pipefail
spar=$1 injector=$2 scratch=$3
# Compares archives record by record, apart from run.id and elapsed_ms.
same_records="$(cd "$(dirname "$0")" && pwd)/same_records.py"
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
# A spar built with GCC's AddressSanitizer needs its runtime loaded first.
preload=$injector
asan=$(ldd "$spar" 2>/dev/null | sed -n 's/.*libasan[^ ]* => \([^ ]*\).*/\1/p')
[ -z "$asan" ] || preload="$asan:$injector"
# The operating system's text for ENOSPC (Python's os.strerror, from the C library).
disk_full=$(/usr/bin/python3 -c 'import errno, os; print(os.strerror(errno.ENOSPC))')

first=8 total=16  # checkpoints every 4 steps: at 8 before the fault, at 12 and 16 after it
run_args=(ring8 --seed 5 --quiet --threads 1 --set model.width=16 --set output.checkpoint_every=4
  --set output.log_every=1 --set output.sample_every=4)
"$spar" train "${run_args[@]}" --out reference --steps "$total" || exit 1

step_of() { "$spar" inspect "$1" 2>/dev/null | sed -n 's/.*, step \([0-9]*\)$/\1/p'; }

# Why folder $1 differs from the reference, or nothing when it does not.
difference() {
  /usr/bin/python3 "$same_records" reference/generator.spar "$1/generator.spar" || return
  /usr/bin/python3 "$same_records" reference/state.spar "$1/state.spar" || return
  cmp -s <(cut -d, -f1,3- reference/log.csv) <(cut -d, -f1,3- "$1/log.csv") ||
    { echo "log.csv differs (apart from the seconds)"; return; }
  cmp -s reference/curves.svg "$1/curves.svg" || { echo "curves.svg differs"; return; }
  cmp -s <(grep -v "^#" reference/recipe.toml) <(grep -v "^#" "$1/recipe.toml") ||
    { echo "recipe.toml differs (apart from its comments)"; return; }
  local pictures
  pictures=$(diff -rq reference/samples "$1/samples" | tr '\n' ' ')
  [ -z "$pictures" ] || { echo "the sample pictures differ: $pictures"; return; }
}

failures=0
fail() {
  echo "FAIL $kind: $*"
  failures=$((failures + 1))
}

# full_disk KIND MATCHING NAMED [ALLOWANCE]: writes to files whose path holds MATCHING fail
# after ALLOWANCE bytes (default 0); the message must name NAMED.
full_disk() {
  kind=$1
  local matching=$2 named=$3 allowance=${4:-0} folder="run-$1"
  rm -rf "$folder" injected.txt
  "$spar" train "${run_args[@]}" --out "$folder" --steps "$first" || { fail "first run failed"; return; }
  local state_before generator_before
  state_before=$(step_of "$folder/state.spar") generator_before=$(step_of "$folder/generator.spar")
  [ "$allowance" = log-size ] && allowance=$(stat -c %s "$folder/log.csv")
  SPAR_FAIL_WRITES_MATCHING=$matching SPAR_FAIL_WRITES_AFTER=$allowance \
    SPAR_FAIL_WRITES_REPORT="$PWD/injected.txt" LD_PRELOAD="$preload" \
    "$spar" resume "$folder" --steps "$total" --quiet >stdout.txt 2>stderr.txt
  local code=$? line
  line=$(head -n 1 stderr.txt)
  echo "$kind: resume with full disk exited $code: $line"
  [ -s injected.txt ] || fail "the injector refused no write to a path holding '$matching'"
  [ "$code" -eq 1 ] || fail "exit code $code, expected 1"
  [ "$(wc -l <stderr.txt)" -eq 1 ] || fail "$(wc -l <stderr.txt) stderr lines, expected 1"
  grep -qF -- "$named" stderr.txt || fail "the message does not name $named"
  grep -qF -- "$disk_full" stderr.txt || fail "the message does not say '$disk_full'"
  # Each checkpoint file loads and holds its earlier step, or (the one of the pair written
  # completely before the other failed) the step of the checkpoint being written.
  local state_after generator_after
  state_after=$(step_of "$folder/state.spar") generator_after=$(step_of "$folder/generator.spar")
  [ -n "$state_after" ] || fail "state.spar does not load"
  [ -n "$generator_after" ] || fail "generator.spar does not load"
  case $matching in
    state.spar) [ "$state_after" = "$state_before" ] ||
      fail "state.spar holds step $state_after, it held $state_before" ;;
    generator.spar) [ "$generator_after" = "$generator_before" ] ||
      fail "generator.spar holds step $generator_after, it held $generator_before" ;;
    *) if [ "$state_after" != "$state_before" ] || [ "$generator_after" != "$generator_before" ]
      then
        fail "state.spar and generator.spar hold steps $state_after and $generator_after," \
          "they held $state_before and $generator_before"
      fi ;;
  esac
  # The message names the step resume will continue from: the one state.spar holds.
  grep -qF -- "(step $state_after)" stderr.txt ||
    fail "the message does not name the kept checkpoint's step '(step $state_after)'"
  local leftovers
  leftovers=$(find "$folder" -name '*.tmp-*' | tr '\n' ' ')
  [ -z "$leftovers" ] || fail "temporary files left: $leftovers"
  # With room on the disk again, the run finishes as if nothing had happened.
  if ! "$spar" resume "$folder" --steps "$total" --quiet 2>stderr.txt; then
    fail "resume without the injector failed: $(tr '\n' '|' <stderr.txt)"
    return
  fi
  local problem
  problem=$(difference "$folder")
  [ -z "$problem" ] || fail "after resuming without the injector: $problem"
}

full_disk checkpoint-state state.spar state.spar
full_disk checkpoint-generator generator.spar generator.spar
full_disk picture /samples/step- samples/step-
full_disk curves curves.svg curves.svg
# The log: resume first rewrites log.csv whole (the same bytes, as the run stopped at a
# checkpoint); that much may be written, the rows appended after it may not.
full_disk log log.csv log.csv log-size
if [ "$failures" -eq 0 ]; then
  echo "full disk during every kind of write: stopped cleanly, nothing lost"
else
  echo "$failures failed checks"
  exit 1
fi
