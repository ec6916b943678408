#!/usr/bin/env bash
# Scaling benchmark of `latentlift climatology`: wall time against MPI ranks (and threads)
# on this machine, for (A) analyze outputs read back and (B) pressure-level model inputs
# analysed on the fly. Prints a Markdown table.
# Usage: scripts/bench_climatology.sh [--ranks "1 2"] [--group G] [--files N] [--times N] [--ny N] [--nx N] [--keep]
#   --ranks  rank counts to try under mpirun (default "1 2"; each rank runs 1 thread)
#   --group  grouping of the statistics (default all; month/hour multiply the state to write by 12/24)
#   --files/--times/--ny/--nx  size of the generated analyze-like inputs (default 8 x 12 steps on 180 x 240)
#   --keep   keep the temporary folder and print its path
# Environment: LATENTLIFT_BUILD (default build/), TMPDIR for the temporary folder.
# As root, OpenMPI needs OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 (set here).
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build=${LATENTLIFT_BUILD:-"$here/build"}
ranks="1 2"
group=all
files=8 times=12 ny=180 nx=240 keep=0
while [ $# -gt 0 ]; do
  case "$1" in
    --ranks) ranks=$2; shift 2 ;;
    --group) group=$2; shift 2 ;;
    --files) files=$2; shift 2 ;;
    --times) times=$2; shift 2 ;;
    --ny) ny=$2; shift 2 ;;
    --nx) nx=$2; shift 2 ;;
    --keep) keep=1; shift ;;
    *) echo "bench_climatology: unknown option $1" >&2; exit 2 ;;
  esac
done
tool="$build/latentlift"
if [ ! -x "$tool" ]; then
  echo "bench_climatology: $tool not found; run scripts/setup.sh first (or set LATENTLIFT_BUILD)" >&2
  exit 2
fi
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
have_mpi=0
command -v mpirun >/dev/null && have_mpi=1
work=$(mktemp -d "${TMPDIR:-/tmp}/latentlift-climbench.XXXXXX")
if [ "$keep" -eq 0 ]; then trap 'rm -rf "$work"' EXIT; fi

# (A) analyze-like outputs; (B) copies of the coastal demo grid shifted by whole days.
/usr/bin/python3 "$here/tests/stats/make_analysis_outputs.py" "$work/a" --files "$files" --times "$times" \
  --ny "$ny" --nx "$nx" --levels 0 >/dev/null
sample="$here/sample_grids/vessaline_coast_lcc.nc"
model_files=8
/usr/bin/python3 - "$sample" "$work/b" "$model_files" <<'PY'
import os, shutil, sys
import netCDF4
src, out, n = sys.argv[1], sys.argv[2], int(sys.argv[3])
os.makedirs(out, exist_ok=True)
for i in range(n):
    dst = os.path.join(out, "model_%02d.nc" % i)
    shutil.copy(src, dst)
    with netCDF4.Dataset(dst, "a") as nc:
        t = nc["time"]
        shift = netCDF4.date2num(netCDF4.num2date(0, t.units, t.calendar), "days since 1970-01-01")  # unit check
        step_days = {"hours": 24.0, "days": 1.0, "minutes": 1440.0, "seconds": 86400.0}[t.units.split()[0]]
        t[:] = t[:] + 3 * i * step_days   # every copy three days later
PY
points=$((ny * nx))
steps_a=$((files * times))
model_steps=$(( model_files * $(ncdump -h "$sample" | awk '/time = UNLIMITED/ {gsub(/[()]/, "", $6); print $6}') ))
model_columns=$(ncdump -h "$sample" | awk '/^\ty = / {y = $3} /^\tx = / {x = $3} END {print x * y}')

run() {  # run LABEL RANKS THREADS INPUTS...  -> prints a table row
  local label=$1 r=$2 th=$3; shift 3
  local out="$work/stats_${label}_${r}_${th}.nc" start end
  rm -f "$out"
  start=$(date +%s.%N)
  if [ "$r" = "serial" ]; then
    "$tool" climatology "$@" -o "$out" --group "$group" --threads "$th" --quiet
  else
    mpirun --oversubscribe -n "$r" "$tool" climatology "$@" -o "$out" --group "$group" --threads "$th" --quiet
  fi
  end=$(date +%s.%N)
  echo "$label $r $th $start $end"
}

load_before=$(cut -d' ' -f1-3 /proc/loadavg)
rows=()
for th in 1 2; do rows+=("$(run A serial "$th" "$work"/a/*.nc)"); done
if [ "$have_mpi" -eq 1 ]; then for r in $ranks; do rows+=("$(run A "$r" 1 "$work"/a/*.nc)"); done; fi
for th in 1 2; do rows+=("$(run B serial "$th" "$work"/b/*.nc)"); done
if [ "$have_mpi" -eq 1 ]; then for r in $ranks; do rows+=("$(run B "$r" 1 "$work"/b/*.nc)"); done; fi

echo
echo "bench_climatology on $(nproc) cores ($(uname -m)); --group $group; load average before: $load_before, after: $(cut -d' ' -f1-3 /proc/loadavg)"
echo "(A) $steps_a analyze-output time steps of $points points; (B) $model_steps model time steps of $model_columns columns (analysis included)"
echo
echo "| input | processes | threads each | wall s | time steps/s | grid points x steps / s |"
echo "|---|---|---|---|---|---|"
for row in "${rows[@]}"; do
  set -- $row
  awk -v l="$1" -v r="$2" -v th="$3" -v s="$4" -v e="$5" -v sa="$steps_a" -v pa="$points" \
      -v sb="$model_steps" -v pb="$model_columns" 'BEGIN {
    w = e - s; steps = (l == "A") ? sa : sb; pts = (l == "A") ? pa : pb;
    name = (l == "A") ? "analyze outputs" : "model inputs";
    proc = (r == "serial") ? "1 (no mpirun)" : r " (mpirun)";
    printf "| %s | %s | %s | %.2f | %.1f | %.3g |\n", name, proc, th, w, steps / w, steps * pts / w }'
done
if [ "$have_mpi" -eq 0 ]; then echo; echo "(mpirun not found: MPI rows skipped)"; fi
# the outputs of all runs of one input must agree
for label in A B; do
  first=""
  for f in "$work"/stats_${label}_*.nc; do
    if [ -z "$first" ]; then first=$f; continue; fi
    /usr/bin/python3 "$here/tests/stats/compare_stats.py" "$first" "$f" >/dev/null ||
      { echo "bench_climatology: $f differs from $first" >&2; exit 1; }
  done
done
echo
echo "All runs of each input wrote the same statistics (tests/stats/compare_stats.py)."
[ "$keep" -eq 1 ] && echo "kept $work"
exit 0
