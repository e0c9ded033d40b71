#!/usr/bin/env bash
# Installs the built spar into a scratch prefix, then configures, builds and runs the consumer
# against it. Usage: run.sh <spar build dir> <consumer source dir> <scratch dir>
set -euo pipefail
build=$1 source=$2 scratch=$3
rm -rf "$scratch"
cmake --install "$build" --prefix "$scratch/prefix" >/dev/null
cmake -S "$source" -B "$scratch/build" -DCMAKE_PREFIX_PATH="$scratch/prefix" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$scratch/build" >/dev/null
"$scratch/build/consumer"
