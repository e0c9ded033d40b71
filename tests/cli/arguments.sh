#!/usr/bin/env bash
# A bad command line gives one line on stderr in spar's own words, exit code 2, nothing on
# stdout, and creates or changes no file; --help and --version still exit 0.
# Usage: arguments.sh SPAR SCRATCH
set -uo pipefail
spar=$(realpath "$1") scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
failures=0
# Every file and folder under the scratch folder with its kind, size and modification time
# (the command's own stdout.txt and stderr.txt aside).
snapshot() {
  find . -mindepth 1 ! -name stdout.txt ! -name stderr.txt -printf '%y %p %s %T@\n' | sort
}
# expect_error WHAT EXPECTED-TEXT COMMAND...: exit code 2, one stderr line holding the text,
# an empty stdout, and the scratch folder as it was.
expect_error() {
  local what=$1 text=$2
  shift 2
  local before
  before=$(snapshot)
  "$@" >stdout.txt 2>stderr.txt
  local code=$?
  local lines
  lines=$(wc -l <stderr.txt)
  if [ "$code" -ne 2 ] || [ "$lines" -ne 1 ] || ! grep -qF -- "$text" stderr.txt ||
    [ -s stdout.txt ]; then
    echo "FAIL $what: exit $code, $lines stderr lines, expected '$text' in:"
    cat stderr.txt stdout.txt
    failures=$((failures + 1))
  elif [ "$(snapshot)" != "$before" ]; then
    echo "FAIL $what: files changed:"
    diff <(echo "$before") <(snapshot)
    failures=$((failures + 1))
  else
    echo "ok   $what: $(cat stderr.txt)"
  fi
}
# expect_success WHAT COMMAND...: exit code 0.
expect_success() {
  local what=$1
  shift
  if "$@" >stdout.txt 2>stderr.txt; then
    echo "ok   $what"
  else
    echo "FAIL $what: exit $?:"
    cat stderr.txt
    failures=$((failures + 1))
  fi
}

"$spar" train ring8 --out good --steps 20 --quiet --set model.width=16 || exit 1
mkdir -p somefolder && echo "not a folder" >somefile

# Names of commands and options: the nearest one is suggested.
expect_error "misspelt command" "spar: trian: no such command; did you mean 'train'?" \
  "$spar" trian ring8 --out r
expect_error "unknown command" "spar: frobnicate: no such command; the commands are demo, train," \
  "$spar" frobnicate
expect_error "no command" "spar: no command given; the commands are demo, train," "$spar"
expect_error "unknown option before the command" "spar: --bogus: no such option" \
  "$spar" --bogus train ring8 --out r
expect_error "misspelt option" "spar train: --thread: no such option; did you mean '--threads'?" \
  "$spar" train ring8 --out r --thread 1
expect_error "misspelt option with =" "spar train: --stpes: no such option; did you mean '--steps'?" \
  "$spar" train ring8 --out r --stpes=5
expect_error "single dash for a long option" "spar train: -force: no such option; did you mean '--force'?" \
  "$spar" train ring8 --out r -force
for command in "demo" "train ring8 --out r" "resume good" "sample good" "evaluate good" \
  "inspect good" "check-gradients" "bench"; do
  name=${command%% *}
  # shellcheck disable=SC2086
  expect_error "unknown option on $name" "spar $name: --frobnicate: no such option; see 'spar $name --help'" \
    "$spar" $command --frobnicate
done

# Numbers: plain ranges, whatever was given.
expect_error "negative steps" "spar train: --steps must be a positive integer, not -5" \
  "$spar" train ring8 --out r --steps -5
expect_error "zero steps on resume" "spar resume: --steps must be a positive integer, not 0" \
  "$spar" resume good --steps 0
expect_error "zero steps on demo" "spar demo: --steps must be a positive integer, not 0" \
  "$spar" demo --out r --steps 0
expect_error "steps that are not a number" "spar train: --steps must be a positive integer, not 'abc'" \
  "$spar" train ring8 --out r --steps abc
expect_error "steps that are not whole" "spar train: --steps must be a positive integer, not '1.5'" \
  "$spar" train ring8 --out r --steps 1.5
expect_error "steps past int64" "spar train: --steps must be at most 1000000000000, not 99999999999999999999" \
  "$spar" train ring8 --out r --steps 99999999999999999999
expect_error "negative seed" "spar train: --seed must be zero or a positive integer, not -1" \
  "$spar" train ring8 --out r --seed -1
expect_error "zero samples" "spar sample: --count must be a positive integer, not 0" \
  "$spar" sample good -n 0 -o r.png
expect_error "too many samples" "spar sample: --count must be at most 100000, not 100001" \
  "$spar" sample good --count 100001 -o r.png
expect_error "negative samples to judge" "spar evaluate: --count must be a positive integer, not -3" \
  "$spar" evaluate good -n -3
expect_error "count that is not a number" "spar evaluate: --count must be a positive integer, not 'many'" \
  "$spar" evaluate good -n many
# --threads on every subcommand that computes.
for command in "demo --out r" "train ring8 --out r" "resume good" "sample good -o r.png" \
  "evaluate good" "check-gradients" "bench"; do
  name=${command%% *}
  # shellcheck disable=SC2086
  expect_error "--threads 0 on $name" "spar $name: --threads must be a positive integer, not 0" \
    "$spar" $command --threads 0
done
expect_error "too many threads" "spar train: --threads must be at most 1024, not 5000" \
  "$spar" train ring8 --out r --threads 5000

# Arguments and values that are missing, doubled or too many.
expect_error "missing --out" "spar train: --out is missing (run folder to create)" \
  "$spar" train ring8
expect_error "missing recipe" "spar train: recipe is missing (preset name or recipe file)" \
  "$spar" train --out r
expect_error "missing run folder" "spar resume: folder is missing" "$spar" resume
expect_error "missing source" "spar sample: source is missing" "$spar" sample -o r.png
expect_error "option without its value" "spar train: --out needs a value (run folder to create)" \
  "$spar" train ring8 --out
expect_error "option followed by another" "spar train: --out needs a value" \
  "$spar" train ring8 --out --quiet
expect_error "number option followed by another" "spar train: --steps needs a value" \
  "$spar" train ring8 --out r --steps --quiet
expect_error "--set without a value" "spar train: --set needs a value" \
  "$spar" train ring8 --out r --set
expect_error "option given twice" "spar train: --out is given more than once" \
  "$spar" train ring8 --out r --out s
expect_error "switch given a value" "spar train: --quiet takes no value" \
  "$spar" train ring8 --out r --quiet=yes
expect_error "extra positional argument" "spar train: extra: unexpected argument; train takes one argument (recipe)" \
  "$spar" train ring8 extra --out r
expect_error "extra argument to inspect" "spar inspect: b: unexpected argument" \
  "$spar" inspect good b
expect_error "argument to a command that takes none" "spar bench: now: unexpected argument; bench takes only options" \
  "$spar" bench now

# Where samples go.
expect_error "-o naming a folder" "somefolder: names a folder; pass a file such as grid.png to -o, or use --into" \
  "$spar" sample good -o somefolder
expect_error "-o ending in /" "new/: names a folder" "$spar" sample good -o new/
expect_error "--into naming a file" "somefile: exists and is not a folder; --into needs a folder" \
  "$spar" sample good --into somefile
expect_error "--into through a file" "somefile/inner: cannot make the folder" \
  "$spar" sample good --into somefile/inner
expect_error "-o and --into together" "spar sample: --output and --into do not go together" \
  "$spar" sample good -o r.png --into r
[ "$(cat somefile)" = "not a folder" ] || { echo "FAIL: somefile changed"; failures=$((failures + 1)); }

# What still works: help, the version, and --threads wherever it is accepted.
expect_success "--help" "$spar" --help
grep -q "Usage: spar" stdout.txt || { echo "FAIL: --help printed no usage"; failures=$((failures + 1)); }
for name in demo train resume sample evaluate inspect check-gradients bench; do
  expect_success "$name --help" "$spar" "$name" --help
done
for name in demo train resume sample evaluate check-gradients bench; do
  "$spar" "$name" --help | grep -q -- "--threads N" ||
    { echo "FAIL: $name --help lists no --threads"; failures=$((failures + 1)); }
done
expect_success "--help beside a bad value" "$spar" train ring8 --steps -5 --help
expect_success "--version" "$spar" --version
expect_success "sample --threads 1" "$spar" sample good -n 4 -o four.png --threads 1
expect_success "evaluate --threads 1" "$spar" evaluate good -n 100 --threads 1
expect_success "check-gradients --threads 1" "$spar" check-gradients --only matmul --threads 1

[ "$failures" -eq 0 ] && echo "all bad command lines refused cleanly"
exit "$failures"
