#!/bin/sh
# Draws 1,000,000 float64 normals from spar::Rng(seed 20240611, stream 7) with
# spar_reference_dump and checks them with normal_draws.py (mean, variance, neighbour
# correlation, Kolmogorov-Smirnov and Cramer-von Mises tests against scipy.stats).
#
# Usage: check_normal_draws.sh PATH_TO_SPAR_REFERENCE_DUMP
# Exit status: normal_draws.py's (0 pass, 1 a check failed, 2 bad usage or unreadable
# draws); 2 as well when the dump itself fails.
set -u
if [ "$#" -ne 1 ]; then
  echo "check_normal_draws.sh: usage: check_normal_draws.sh PATH_TO_SPAR_REFERENCE_DUMP" >&2
  exit 2
fi
here=$(dirname "$0")
draws=$(mktemp "${TMPDIR:-/tmp}/spar_normal_draws.XXXXXX") || exit 2
trap 'rm -f "$draws" "$draws.part"' EXIT
if ! "$1" normal 20240611 7 1000000 "$draws"; then
  echo "check_normal_draws.sh: $1 normal 20240611 7 1000000 failed" >&2
  exit 2
fi
/usr/bin/python3 "$here/normal_draws.py" "$draws"
