#!/usr/bin/env bash
# Fault injection: kill -9 at random moments of a run that checkpoints every few steps, then
# `spar resume` it. Every time, the latest complete checkpoint must load (resume exits 0), the
# finished run must equal an uninterrupted one bit for bit (generator.spar and state.spar
# record for record, apart from the run's id and the elapsed time; log.csv apart from the
# seconds column; the sample pictures and curves.svg byte for byte; recipe.toml apart from its
# comments, which name the run), and no temporary file (*.tmp-*) may be left in the folder.
# A kill that lands before the first checkpoint exists is a trial too: resume must then
# refuse with exit code 2 and one line, and `train --force` starts the run again.
# The kill moments are drawn uniformly over the reference run's duration from bash's $RANDOM,
# seeded with a printed value. The printed SPAR_KILL_SEED and SPAR_KILL_RUN_US (the duration,
# measured unless given) replay the same moments; SPAR_KILL_TRIALS changes the number of
# trials, 50 by default.
# Usage: kill_anywhere.sh SPAR SCRATCH
set -uo pipefail
spar=$1 scratch=$2
# Compares archives record by record, apart from run.id and elapsed_ms.
same_records="$(cd "$(dirname "$0")" && pwd)/same_records.py"
trials=${SPAR_KILL_TRIALS:-50}
seed=${SPAR_KILL_SEED:-4093}
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1

run_args=(ring8 --steps 120 --seed 11 --quiet --threads 1 --set model.width=16
  --set output.checkpoint_every=3 --set output.log_every=1 --set output.sample_every=10)
begin=$(date +%s%N)
"$spar" train "${run_args[@]}" --out reference || exit 1
run_us=${SPAR_KILL_RUN_US:-$((($(date +%s%N) - begin) / 1000))}
echo "reference run: $((run_us / 1000)) ms; kill moments from seed $seed" \
  "(replay with SPAR_KILL_SEED=$seed SPAR_KILL_RUN_US=$run_us)"

step_of() { "$spar" inspect "$1" 2>/dev/null | sed -n 's/.*, step \([0-9]*\)$/\1/p'; }

# Why folder `run` differs from the reference, or nothing when it does not.
difference() {
  /usr/bin/python3 "$same_records" reference/generator.spar run/generator.spar || return
  /usr/bin/python3 "$same_records" reference/state.spar run/state.spar || return
  cmp -s <(cut -d, -f1,3- reference/log.csv) <(cut -d, -f1,3- run/log.csv) ||
    { echo "log.csv differs (apart from the seconds)"; return; }
  cmp -s reference/curves.svg run/curves.svg || { echo "curves.svg differs"; return; }
  cmp -s <(grep -v "^#" reference/recipe.toml) <(grep -v "^#" run/recipe.toml) ||
    { echo "recipe.toml differs (apart from its comments)"; return; }
  local pictures
  pictures=$(diff -rq reference/samples run/samples | tr '\n' ' ')
  [ -z "$pictures" ] || { echo "the sample pictures differ: $pictures"; return; }
}

tried=0 survived=0 early=0
RANDOM=$seed
for trial in $(seq "$trials"); do
  rm -rf run
  # Uniform over [0, run_us) microseconds: a fraction of 30 random bits.
  delay_us=$(((((RANDOM << 15) | RANDOM) * run_us) >> 30))
  delay=$(printf '%d.%06d' $((delay_us / 1000000)) $((delay_us % 1000000)))
  "$spar" train "${run_args[@]}" --out run 2>train-stderr.txt &
  pid=$!
  sleep "$delay"
  kill -9 "$pid" 2>/dev/null
  { wait "$pid"; } 2>/dev/null  # without bash's "Killed" line
  train_code=$?
  kept=$(step_of run/state.spar)
  tried=$((tried + 1))
  what="trial $trial: kill -9 after ${delay}s (train exit $train_code, state.spar at step ${kept:-none})"
  problem="" outcome="resumed"
  "$spar" resume run --quiet --threads 1 >resume-stdout.txt 2>resume-stderr.txt
  code=$?
  if [ "$code" -eq 2 ] && [ ! -e run/state.spar ]; then
    # Before the first checkpoint: a one-line refusal, then a fresh start.
    early=$((early + 1))
    what="$what, before the first checkpoint"
    outcome="resume refused ($(cat resume-stderr.txt)), restarted with train --force"
    [ "$(wc -l <resume-stderr.txt)" -eq 1 ] ||
      problem="resume's refusal is not one line: $(tr '\n' '|' <resume-stderr.txt)"
    if [ -z "$problem" ]; then
      "$spar" train "${run_args[@]}" --out run --force 2>resume-stderr.txt ||
        problem="train --force failed: $(tr '\n' '|' <resume-stderr.txt)"
    fi
  elif [ "$code" -ne 0 ]; then
    problem="resume exited $code: $(tr '\n' '|' <resume-stderr.txt)"
  fi
  if [ -z "$problem" ]; then
    leftovers=$(find run -name '*.tmp-*' | tr '\n' ' ')
    [ -z "$leftovers" ] || problem="temporary files left: $leftovers"
  fi
  [ -n "$problem" ] || problem=$(difference)
  if [ -z "$problem" ]; then
    survived=$((survived + 1))
    echo "ok   $what: $outcome, identical"
  else
    echo "FAIL $what: $problem"
  fi
done
echo "tried $tried, survived $survived; killed before the first checkpoint: $early (counted in both)"
[ "$survived" -eq "$tried" ]
