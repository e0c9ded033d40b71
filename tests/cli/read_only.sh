#!/usr/bin/env bash
# Fault injection: `spar resume` on a read-only run folder fails with exit code 1 or 2 and one
# stderr line naming the folder, and changes nothing in it (names, types, modes, sizes,
# modification times and SHA-256 of every file compared before and after).
# The folder is made read-only with chmod -R a-w. Permissions do not stop root, so as root the
# check runs in every one of these ways that works here (each is probed first):
#   - in a private mount namespace (unshare -m) where the folder is bind-mounted read-only;
#   - as the unprivileged user 65534 (setpriv, or else runuser -u nobody), which cannot write
#     to root's folder whatever its modes.
# When none works, the script prints SKIP and exits 77, which CTest reports as skipped (never
# as passed).
# Usage: read_only.sh SPAR SCRATCH
set -uo pipefail
spar=$1 scratch=$2
rm -rf "$scratch" && mkdir -p "$scratch" && cd "$scratch" || exit 1
scratch=$PWD
folder=$scratch/ro-run
"$spar" train ring8 --out "$folder" --steps 6 --quiet --set model.width=16 \
  --set output.checkpoint_every=3 || exit 1
chmod -R a-w "$folder"
trap 'chmod -R u+w "$folder"' EXIT

# Everything about the folder that a write would change.
snapshot() {
  (cd "$folder" && find . -printf '%y %m %s %T@ %p\n' | sort &&
    find . -type f -print0 | sort -z | xargs -0 sha256sum)
}

# Ways of running a command on which the folder is read-only: "NAME|PREFIX WORDS".
ways=()
if [ "$(id -u)" -ne 0 ]; then
  ways+=("permissions|")
else
  # shellcheck disable=SC2016  # the inner bash expands "$0" and "$@"
  bind_ro=(unshare -m bash -c 'mount --bind "$0" "$0" && mount -o remount,ro,bind "$0" "$0" &&
    exec "$@"' "$folder")
  if "${bind_ro[@]}" true 2>/dev/null && ! "${bind_ro[@]}" touch "$folder/probe" 2>/dev/null; then
    ways+=("read-only bind mount|${bind_ro[*]@Q}")
  fi
  for user in "setpriv --reuid=65534 --regid=65534 --clear-groups" "runuser -u nobody --"; do
    # The user must be able to run spar and read the run, and unable to write into it.
    if $user test -x "$spar" -a -r "$folder/state.spar" 2>/dev/null &&
      ! $user touch "$folder/probe" 2>/dev/null; then
      ways+=("as user 65534 (${user%% *})|$user")
      break
    fi
  done
fi
rm -f "$folder/probe" 2>/dev/null
if [ "${#ways[@]}" -eq 0 ]; then
  echo "SKIP: no way to make the folder read-only for spar here (root, and neither a" \
    "read-only bind mount nor an unprivileged user works)"
  exit 77
fi

failures=0
for way in "${ways[@]}"; do
  name=${way%%|*} prefix=${way#*|}
  before=$(snapshot)
  eval "$prefix" '"$spar" resume "$folder" --steps 12 --quiet' >stdout.txt 2>stderr.txt
  code=$?
  after=$(snapshot)
  problem=""
  [ "$code" -eq 1 ] || [ "$code" -eq 2 ] || problem="exit code $code, expected 1 or 2"
  [ "$(wc -l <stderr.txt)" -eq 1 ] || problem="$problem; $(wc -l <stderr.txt) stderr lines"
  grep -qF -- "$folder" stderr.txt || problem="$problem; the message does not name $folder"
  [ "$before" = "$after" ] ||
    problem="$problem; the folder changed: $(diff <(echo "$before") <(echo "$after") | tr '\n' '|')"
  if [ -z "$problem" ]; then
    echo "ok   $name: exit $code, $(cat stderr.txt)"
  else
    echo "FAIL $name: ${problem#; }; stderr: $(tr '\n' '|' <stderr.txt)"
    failures=$((failures + 1))
  fi
done
[ "$failures" -eq 0 ]
