#!/usr/bin/env bash
# The README's first command: install the dependencies, build latentlift, analyse the
# Vessaline Coast sample grid (an invented scenario, see sample_grids/README.md) and
# show where the output is and how to look at one column.
# Usage: scripts/demo.sh            (output: out/demo_analysis.nc; LATENTLIFT_BUILD overrides build/)
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build=${LATENTLIFT_BUILD:-"$here/build"}
input="$here/sample_grids/vessaline_coast_lcc.nc"
output="$here/out/demo_analysis.nc"

"$here/scripts/setup.sh" "$build" latentlift   # the tool only; scripts/test.sh builds the tests
tool="$build/latentlift"
[ -x "$tool" ] || { echo "demo: $tool was not built" >&2; exit 1; }

if [ ! -s "$input" ]; then
  echo "demo: regenerating the sample grids"
  /usr/bin/python3 "$here/scripts/make_sample_grids.py" "$here/sample_grids"
fi

mkdir -p "$(dirname "$output")"
echo
echo "demo: latentlift analyze sample_grids/$(basename "$input") -o out/$(basename "$output")"
"$tool" analyze "$input" -o "$output" --overwrite

echo
echo "demo: the analysis is in $output"
echo "demo: one column of the warm sector at the second time step (12 UTC):"
echo "      latentlift column sample_grids/$(basename "$input") --lat 39 --lon -148.5 --time 1"
"$tool" column "$input" --lat 39 --lon -148.5 --time 1

echo
echo "demo: a map of the most-unstable parcel's CAPE at 12 UTC:"
echo "      latentlift quicklook out/$(basename "$output") --field mu_cape --time 1 -o out/demo_mu_cape.png"
"$tool" quicklook "$output" --field mu_cape --time 1 -o "$(dirname "$output")/demo_mu_cape.png" --overwrite

echo
echo "demo: header of the output (ncdump -h, first 60 lines):"
ncdump -h "$output" | head -n 60 || true
echo
echo "demo: done. Fields: $output   Other sample grids: $here/sample_grids/"
