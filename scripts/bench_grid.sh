#!/usr/bin/env bash
# Benchmark: analyse a global 0.25 degree grid (1440 x 721 columns, 37 levels, T, q, z,
# float32) end to end and compare with the time to merely read the same inputs.
# Reports wall time, columns per second and peak memory (/usr/bin/time -v).
# Usage: scripts/bench_grid.sh [--threads N] [--deflate] [--keep]
#   --threads N  threads for latentlift analyze (default: all cores)
#   --deflate    write the input deflated and chunked by level (default: contiguous, uncompressed)
#   --keep       keep the temporary folder (input and output) and print its path
# Environment: LATENTLIFT_BUILD (default build/), TMPDIR for the temporary folder (~0.5 GB).
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build=${LATENTLIFT_BUILD:-"$here/build"}
threads=$(nproc)
deflate=""
keep=0
while [ $# -gt 0 ]; do
  case "$1" in
    --threads) threads=$2; shift 2 ;;
    --deflate) deflate="--deflate"; shift ;;
    --keep) keep=1; shift ;;
    *) echo "bench_grid: unknown option $1" >&2; exit 2 ;;
  esac
done

tool="$build/latentlift"
if [ ! -x "$tool" ]; then
  echo "bench_grid: $tool not found; run scripts/setup.sh first (or set LATENTLIFT_BUILD)" >&2
  exit 2
fi
work=$(mktemp -d "${TMPDIR:-/tmp}/latentlift-bench.XXXXXX")
if [ "$keep" -eq 0 ]; then trap 'rm -rf "$work"' EXIT; fi

columns=$((1440 * 721))
echo "bench_grid: generating the input in $work ($columns columns, 37 levels, T q z float32${deflate:+, deflated})"
gen_start=$(date +%s.%N)
/usr/bin/python3 "$here/scripts/make_bench_grid.py" "$work/global_0p25.nc" $deflate
gen_end=$(date +%s.%N)
printf 'bench_grid: input %s MB, generated in %.1f s\n' \
  "$(du -m "$work/global_0p25.nc" | cut -f1)" "$(awk "BEGIN {print $gen_end - $gen_start}")"

# Baseline: read T, q, z with netCDF-C, 16 latitude rows (all levels) at a time.
c++ -O2 -std=c++17 -o "$work/read_grid" "$here/bench/read_grid.cpp" $(pkg-config --cflags --libs netcdf)
/usr/bin/time -v "$work/read_grid" "$work/global_0p25.nc" 16 t q z 2> "$work/read.time" | tee "$work/read.out"

# The analysis, end to end (a first, discarded run warms the page cache like the read did).
"$tool" analyze "$work/global_0p25.nc" -o "$work/warmup.nc" --threads "$threads" --quiet >/dev/null
rm -f "$work/warmup.nc"
/usr/bin/time -v "$tool" analyze "$work/global_0p25.nc" -o "$work/analysis.nc" --threads "$threads" \
  2> "$work/analyze.time" | tee "$work/analyze.out"
tail -n 40 "$work/analyze.time" | grep -v -E '^\s*(Command|Average|Major|Minor|Voluntary|Involuntary|Swaps|File system|Socket|Signals|Page size|Exit)' >&2 || true

wall_seconds() {  # "Elapsed (wall clock) time (h:mm:ss or m:ss): 0:03.21" -> seconds
  awk -F': ' '/Elapsed \(wall clock\)/ {n = split($2, p, ":"); s = 0; for (i = 1; i <= n; i++) s = s * 60 + p[i]; print s}' "$1"
}
peak_mb() { awk -F': ' '/Maximum resident set size/ {printf "%.0f", $2 / 1024}' "$1"; }
cpu_seconds() { awk -F': ' '/User time|System time/ {s += $2} END {printf "%.2f", s}' "$1"; }

read_wall=$(wall_seconds "$work/read.time")
wall=$(wall_seconds "$work/analyze.time")
echo
echo "bench_grid: results (global 0.25 degree, $columns columns x 37 levels, $threads threads, $(nproc) cores)"
printf '  read T, q, z only (netCDF-C): %6.2f s wall, %s s cpu, peak %s MB\n' \
  "$read_wall" "$(cpu_seconds "$work/read.time")" "$(peak_mb "$work/read.time")"
printf '  latentlift analyze:           %6.2f s wall, %s s cpu, peak %s MB, %.0f columns/s\n' \
  "$wall" "$(cpu_seconds "$work/analyze.time")" "$(peak_mb "$work/analyze.time")" "$(awk "BEGIN {print $columns / $wall}")"
echo "  load average during the run: $(cut -d' ' -f1-3 /proc/loadavg) (other work on the machine slows wall time)"
if [ "$keep" -eq 1 ]; then echo "bench_grid: kept $work"; fi
