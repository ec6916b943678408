#!/usr/bin/env bash
# Build every target with AddressSanitizer and UndefinedBehaviorSanitizer in a separate build
# folder (default build-asan; ccache shares objects) and run the whole test suite, the
# damaged-input corpus included, under them. Any sanitizer report fails the run.
# Usage: scripts/test_sanitizers.sh [build-dir [ctest options...]]
# Notes: leak detection is off (netCDF-C, HDF5, PROJ and UDUNITS keep process-lifetime
# allocations); the MPI backend is not built here (OpenMPI's own allocations are not ours to
# check); tests/sanitizer.supp lists the single suppressed third-party frame, with its reason.
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build=${1:-"$here/build-asan"}
shift $(( $# > 0 ? 1 : 0 ))
"$here/scripts/setup.sh" --deps-only

flags="-O1 -g -fno-omit-frame-pointer -fsanitize=address,undefined -fno-sanitize-recover=undefined"
cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="$flags" \
  -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=address,undefined" \
  -DLATENTLIFT_WITH_MPI=OFF -DLATENTLIFT_BUILD_BENCH=OFF >/dev/null
cmake --build "$build" -j "$(nproc)"

export ASAN_OPTIONS="detect_leaks=0:abort_on_error=0:halt_on_error=1:suppressions=$here/tests/sanitizer.supp"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1"
export LATENTLIFT_CORPUS_TIMEOUT=180   # instrumented runs are several times slower
cd "$build"
ctest --output-on-failure -j "$(nproc)" "$@"
echo "test_sanitizers: every suite passed under AddressSanitizer and UndefinedBehaviorSanitizer"
