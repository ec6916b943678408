#!/usr/bin/env bash
# Install dependencies, build, and run every test (unit, reference, end-to-end).
# Usage: scripts/test.sh [ctest options...]
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build="$here/build"
"$here/scripts/setup.sh" "$build"
cd "$build"
ctest --output-on-failure -j "$(nproc)" "$@"
