#!/usr/bin/env bash
# Build the column-kernel benchmark (Release) and run it: columns per second per
# CPU core for 37-level ERA5-like columns, both buoyancy modes, with and without
# level fields, both MU parcel rules. Targets (issue 10): >= 450,000 columns/s per
# core, virtual mode, 2-D; >= 200,000 with level fields.
# With --instructions, instead count the instructions per column with callgrind
# (valgrind): 2 x 4096 pool columns per case, repeatable on a loaded machine.
# Usage: scripts/bench_kernel.sh [--instructions] [build-dir] [extra Google Benchmark options...]
#        (default build dir: build-bench; e.g. --benchmark_min_time=2)
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
instructions=0
if [ "${1:-}" = "--instructions" ]; then instructions=1; shift; fi
build=${1:-"$here/build-bench"}
shift $(( $# > 0 ? 1 : 0 ))
target_cols_per_s=450000
target_level_fields_cols_per_s=200000

cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=Release -DLATENTLIFT_BUILD_BENCH=ON >/dev/null
if [ "$instructions" = 1 ]; then
  command -v valgrind >/dev/null || { echo "bench_kernel: valgrind not found (scripts/setup.sh installs it)" >&2; exit 1; }
  cmake --build "$build" -j 2 --target count_column >/dev/null
  printf '%-44s %22s\n' "case (37 levels, 2 x 4096 columns)" "instructions/column"
  for mode in virtual temperature; do
    for rule in max_cape max_theta_w; do
      for extra in "" level_fields; do
        out=$(valgrind --tool=callgrind --callgrind-out-file=/dev/null \
              --toggle-collect='latentlift::ColumnAnalyzer::analyze(*' \
              "$build/bench/count_column" "$mode" "$rule" $extra 2>&1)
        ir=$(printf '%s\n' "$out" | sed -n 's/.*Collected : \([0-9]*\).*/\1/p' | tail -1)
        [ -n "$ir" ] || { echo "bench_kernel: no callgrind count for $mode $rule $extra: $out" >&2; exit 1; }
        printf '%-44s %22s\n' "$mode, ${extra:-2-D}, $rule" "$(( ir / 8192 ))"
      done
    done
  done
  exit 0
fi
cmake --build "$build" -j 2 --target bench_column >/dev/null
bin="$build/bench/bench_column"
[ -x "$bin" ] || { echo "bench_kernel: $bin not built (is Google Benchmark, libbenchmark-dev, installed?)" >&2; exit 1; }

json="$build/bench_column.json"
"$bin" --benchmark_min_time=1 --benchmark_out="$json" --benchmark_out_format=json "$@"

/usr/bin/python3 - "$json" "$target_cols_per_s" "$target_level_fields_cols_per_s" <<'PY'
import json, sys
data = json.load(open(sys.argv[1]))
target = float(sys.argv[2])
target_levels = float(sys.argv[3])
ctx = data["context"]
print()
print(f"summary ({ctx.get('num_cpus')} CPUs at {ctx.get('mhz_per_cpu')} MHz, "
      f"load average {', '.join(f'{x:.1f}' for x in ctx.get('load_avg', []))}):")
print(f"  {'case':<40} {'columns/s per core':>20} {'us/column':>10} {'MU flagged':>11}")
for b in data["benchmarks"]:
    rate = b.get("items_per_second", 0.0)
    share = b.get("mu_flagged_share", float("nan"))
    print(f"  {b.get('label', b['name']):<40} {rate:>20,.0f} {1e6 / rate if rate else float('nan'):>10.2f} {share:>10.0%}")
def verdict(prefix, what, goal):
    found = [b for b in data["benchmarks"] if b.get("label", "").startswith(prefix)]
    if found:
        rate = found[0]["items_per_second"]
        word = "meets" if rate >= goal else "MISSES"
        print(f"{what}: {rate:,.0f} columns/s per core ({word} the target of {goal:,.0f})")
verdict("virtual 2-D, 37", "virtual mode, 2-D outputs, 37 levels", target)
verdict("virtual +level fields", "virtual mode, with level fields", target_levels)
if ctx.get("load_avg") and ctx["load_avg"][0] > ctx.get("num_cpus", 1):
    print("note: the machine was loaded while measuring; rates are per CPU second but "
          "shared caches still slow them down")
PY
