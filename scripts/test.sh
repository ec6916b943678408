#!/usr/bin/env bash
# Install dependencies, build, and run every test (unit, reference, end-to-end).
# Usage: scripts/test.sh [ctest options...]
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
build="$here/build"
"$here/scripts/setup.sh" "$build"
cd "$build"
ctest --output-on-failure -j "$(nproc)" "$@"
