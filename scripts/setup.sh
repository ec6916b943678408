#!/usr/bin/env bash
# Install every dependency from Debian packages (when missing) and build latentlift.
# Usage: scripts/setup.sh [build-dir [target...]]   (default: build, every target)
#        scripts/setup.sh --deps-only                 (install the packages, build nothing)
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
deps_only=0
if [ "${1:-}" = "--deps-only" ]; then deps_only=1; shift; fi
build=${1:-"$here/build"}
shift $(( $# > 0 ? 1 : 0 ))
targets=()
for t in "$@"; do targets+=(--target "$t"); done

packages=(build-essential cmake pkg-config
  libnetcdf-dev libnetcdf-c++4-dev netcdf-bin libhdf5-dev libdeflate-dev
  libeccodes-dev libeccodes-tools cdo
  libproj-dev proj-bin proj-data
  libudunits2-dev libtomlplusplus-dev libcli11-dev libpng-dev
  libgdal-dev libcairo2-dev libfreetype-dev fonts-dejavu-core
  libgmt-dev gmt-common gmt-gshhg-low gmt-gshhg-high
  libgtest-dev libgmock-dev libbenchmark-dev valgrind
  libopenmpi-dev openmpi-bin
  ccache gdal-bin python3 python3-numpy python3-scipy python3-netcdf4 python3-colorspacious
  python3-dev pybind11-dev python3-venv python3-pip python3-setuptools python3-wheel python3-pytest
  python3-xarray python3-pandas python3-dask python3-distributed)

missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  echo "setup: installing ${missing[*]}"
  sudo_cmd=""
  [ "$(id -u)" -ne 0 ] && sudo_cmd="sudo"
  $sudo_cmd apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo_cmd apt-get install -y -qq "${missing[@]}" >/dev/null
fi

[ "$deps_only" -eq 1 ] && exit 0
cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j "$(nproc)" "${targets[@]}"
echo "setup: built ${*:-everything} in $build"

# The Python module (built above as build/python/latentlift) installed by pip into a venv that
# sees Debian's NumPy, xarray, pandas and Dask: nothing is fetched (--no-index --no-deps).
if [ ${#targets[@]} -eq 0 ] && [ -f "$build/python/latentlift/__init__.py" ]; then
  env="$build/python-env"
  [ -x "$env/bin/python" ] || /usr/bin/python3 -m venv --system-site-packages "$env"
  LATENTLIFT_BUILD_DIR="$build" "$env/bin/python" -m pip install --quiet --no-build-isolation --no-index \
    --no-deps --disable-pip-version-check "$here/src/python"
  echo "setup: Python module installed in $env (run $env/bin/python)"
fi
