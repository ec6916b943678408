#!/usr/bin/env bash
# Benchmark: latentlift analyze against the NumPy reference of ../shared/bench, in one run.
# Makes the timing grid (720 x 361 columns x 37 levels, T q z float32, deflate level 1, one
# chunk per level map) with ../shared/bench/make_timing_grid.py, then runs, best of N each:
# the NumPy reference (its own in-script time for reading plus analysis, one core),
# `latentlift analyze --threads 1` and `--threads 2` (wall time of the whole command).
# Prints the times, columns per second and the ratios with the targets of issue 10
# (--threads 2: >= 3x the NumPy reference and >= 260,000 columns/s; >= 1.8x from 1 to 2 threads).
#
# Usage: scripts/bench_compare.sh [--repeat N] [--classic] [--keep]
#   --repeat N  runs of each command, the best counts (default 3)
#   --classic   also time latentlift on the same grid uncompressed (netCDF classic, nccopy -k classic)
#   --keep      keep the temporary folder (grids and outputs) and print its path
# Environment: LATENTLIFT_BUILD (default build/), TMPDIR for the temporary folder (~0.2 GB),
#   LATENTLIFT_SHARED (default ../shared beside the repository).
# The NumPy reference runs with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset for that command
# alone (a current NumPy is slowed by them; see the machine notes); if it fails that way it is
# run again with the environment as it is, and the script says so.
set -euo pipefail
usage() { sed -n '2,18p' "$0" | sed 's/^# \{0,1\}//'; }
repeat=3
classic=0
keep=0
while [ $# -gt 0 ]; do
  case "$1" in
    -h|--help) usage; exit 0 ;;
    --repeat) [ $# -ge 2 ] || { echo "bench_compare: --repeat needs a number" >&2; exit 2; }
              repeat=$2; shift 2 ;;
    --classic) classic=1; shift ;;
    --keep) keep=1; shift ;;
    *) echo "bench_compare: unknown option $1 (see --help)" >&2; exit 2 ;;
  esac
done
case "$repeat" in ''|*[!0-9]*|0) echo "bench_compare: --repeat needs a positive whole number" >&2; exit 2 ;; esac

here=$(cd "$(dirname "$0")/.." && pwd)
build=${LATENTLIFT_BUILD:-"$here/build"}
shared=${LATENTLIFT_SHARED:-"$here/../shared"}
tool="$build/latentlift"
python=/usr/bin/python3
[ -x "$tool" ] || { echo "bench_compare: $tool not found; run scripts/setup.sh first (or set LATENTLIFT_BUILD)" >&2; exit 2; }
for f in make_timing_grid.py numpy_reference.py; do
  [ -f "$shared/bench/$f" ] || { echo "bench_compare: $shared/bench/$f not found (set LATENTLIFT_SHARED)" >&2; exit 2; }
done

work=$(mktemp -d "${TMPDIR:-/tmp}/latentlift-compare.XXXXXX")
if [ "$keep" -eq 0 ]; then trap 'rm -rf "$work"' EXIT; fi
grid="$work/timing_grid.nc"
columns=$((720 * 361))
echo "bench_compare: $(date -u '+%Y-%m-%d %H:%M UTC'), $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
echo "bench_compare: making the timing grid (720 x 361 x 37, deflate level 1, one chunk per level map)"
"$python" "$shared/bench/make_timing_grid.py" "$grid" 720 361 37
if [ "$classic" -eq 1 ]; then nccopy -k classic "$grid" "$work/timing_grid_classic.nc"; fi

now() { date +%s.%N; }
best() { printf '%s\n' "$@" | sort -g | head -n 1; }

# The NumPy reference: its last line "numpy-reference: N columns in S s = R columns/s".
numpy_env=(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE)
if ! "${numpy_env[@]}" "$python" -c 'import numpy' 2>/dev/null; then
  numpy_env=(env)
  echo "bench_compare: NumPy fails without OPENBLAS_CORETYPE/OPENBLAS_L2_SIZE; running it with them as set"
fi
numpy_times=()
for _ in $(seq "$repeat"); do
  "${numpy_env[@]}" "$python" "$shared/bench/numpy_reference.py" "$grid" > "$work/numpy.out"
  numpy_times+=("$(awk '/^numpy-reference:/ {print $(NF-4)}' "$work/numpy.out")")
done
numpy_best=$(best "${numpy_times[@]}")

# latentlift analyze: wall time of the whole command (tables, reading, analysis, writing).
time_analyze() {  # input threads -> best wall seconds
  local input=$1 threads=$2 times=() t0 t1
  "$tool" analyze "$input" -o "$work/out.nc" --threads "$threads" --overwrite --quiet >/dev/null  # warm-up
  for _ in $(seq "$repeat"); do
    t0=$(now)
    "$tool" analyze "$input" -o "$work/out.nc" --threads "$threads" --overwrite --quiet >/dev/null
    t1=$(now)
    times+=("$(awk "BEGIN {print $t1 - $t0}")")
  done
  best "${times[@]}"
}
t1=$(time_analyze "$grid" 1)
t2=$(time_analyze "$grid" 2)
if [ "$classic" -eq 1 ]; then
  c1=$(time_analyze "$work/timing_grid_classic.nc" 1)
  c2=$(time_analyze "$work/timing_grid_classic.nc" 2)
fi

echo
echo "bench_compare: timing grid, $columns columns x 37 levels, best of $repeat"
printf '  %-44s %7.2f s  %9.0f columns/s   (runs: %s)\n' "NumPy reference (in-script read + analysis)" \
  "$numpy_best" "$(awk "BEGIN {print $columns / $numpy_best}")" "${numpy_times[*]}"
printf '  %-44s %7.2f s  %9.0f columns/s\n' "latentlift analyze --threads 1 (wall)" "$t1" "$(awk "BEGIN {print $columns / $t1}")"
printf '  %-44s %7.2f s  %9.0f columns/s\n' "latentlift analyze --threads 2 (wall)" "$t2" "$(awk "BEGIN {print $columns / $t2}")"
if [ "$classic" -eq 1 ]; then
  printf '  %-44s %7.2f s  %9.0f columns/s\n' "uncompressed (classic) --threads 1 (wall)" "$c1" "$(awk "BEGIN {print $columns / $c1}")"
  printf '  %-44s %7.2f s  %9.0f columns/s\n' "uncompressed (classic) --threads 2 (wall)" "$c2" "$(awk "BEGIN {print $columns / $c2}")"
fi
verdict() { awk "BEGIN {print ($1 >= $2) ? \"meets\" : \"MISSES\"}"; }
r_numpy=$(awk "BEGIN {printf \"%.2f\", $numpy_best / $t2}")
r_threads=$(awk "BEGIN {printf \"%.2f\", $t1 / $t2}")
rate2=$(awk "BEGIN {printf \"%.0f\", $columns / $t2}")
echo "  ratio NumPy / latentlift --threads 2:  ${r_numpy}x ($(verdict "$r_numpy" 3) the target of 3x)"
echo "  columns/s with --threads 2:            ${rate2} ($(verdict "$rate2" 260000) the target of 260000)"
echo "  speed-up from 1 to 2 threads:          ${r_threads}x ($(verdict "$r_threads" 1.8) the target of 1.8x)"
if [ "$classic" -eq 1 ]; then
  echo "  uncompressed, speed-up 1 to 2 threads: $(awk "BEGIN {printf \"%.2f\", $c1 / $c2}")x"
fi
echo "  load average after the runs: $(cut -d' ' -f1-3 /proc/loadavg) (other work on the machine slows wall times)"
if [ "$keep" -eq 1 ]; then echo "bench_compare: kept $work"; fi
