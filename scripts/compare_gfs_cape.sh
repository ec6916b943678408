#!/usr/bin/env bash
# Agreement of mu_cape with NCEP's own CAPE on the two real GFS 2.5 degree forecasts of
# ../shared/real-data/ncep-nwp-pressure-levels (see its SOURCE.md), for both MU parcel rules
# (analysis.mu_parcel): NCEP's surface-based CAPE (in the derived NetCDF) and, when ecCodes'
# grib_copy and grib_to_netcdf are installed, its CAPE for the 180-0 hPa layer above ground
# (from the GRIB2 files). Prints counts of columns with CAPE > 0, correlation, the median
# ratio where NCEP's CAPE >= 1000 J/kg, and columns with a latent layer classed "none".
# Usage: scripts/compare_gfs_cape.sh [build-dir]   (default: build)
set -euo pipefail
case "${1:-}" in -h|--help) sed -n '2,/^set -euo/{/^#/s/^# \{0,1\}//p}' "$0"; exit 0 ;; esac  # the comment above
here=$(cd "$(dirname "$0")/.." && pwd)
build=${1:-"$here/build"}
data="$here/../shared/real-data/ncep-nwp-pressure-levels"
[ -d "$data/derived-netcdf" ] || { echo "compare_gfs_cape: no $data/derived-netcdf" >&2; exit 1; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
for stem in gfs_2p5deg_20110110_12z_f120 gfs_2p5deg_20111008_00z_f072; do
  for rule in max_cape max_theta_w; do
    "$build/latentlift" analyze "$data/derived-netcdf/${stem}_pl_t_gh_r.nc" \
      "$data/derived-netcdf/${stem}_sfc_sp_orog_cape_cin.nc" -o "$work/$stem-$rule.nc" \
      --set "analysis.mu_parcel=$rule" --quiet
  done
  if command -v grib_copy >/dev/null && command -v grib_to_netcdf >/dev/null; then
    grib_copy -w shortName=cape,typeOfLevel=pressureFromGroundLayer "$data/$stem.grib2" "$work/$stem-cape180.grib2"
    grib_to_netcdf -D NC_FLOAT -o "$work/$stem-cape180.nc" "$work/$stem-cape180.grib2" >/dev/null
  fi
done
/usr/bin/python3 - "$work" "$data/derived-netcdf" <<'PY'
import os, sys
import numpy as np
import netCDF4
work, derived = sys.argv[1:]

def field(path, name):
    with netCDF4.Dataset(path) as ds:
        a = ds[name][0]
        return a.filled(np.nan).astype(float) if np.ma.isMaskedArray(a) else np.asarray(a, float)

for stem in ("gfs_2p5deg_20110110_12z_f120", "gfs_2p5deg_20111008_00z_f072"):
    refs = {"surface-based": field(f"{derived}/{stem}_sfc_sp_orog_cape_cin.nc", "cape")}
    if os.path.exists(f"{work}/{stem}-cape180.nc"):
        refs["180-0 hPa layer"] = field(f"{work}/{stem}-cape180.nc", "cape")
    for rule in ("max_cape", "max_theta_w"):
        out = f"{work}/{stem}-{rule}.nc"
        cape, cls, depth = (field(out, n) for n in ("mu_cape", "latent_class", "latent_layer_depth"))
        print(f"{stem}, mu_parcel = {rule}: {np.sum((depth > 0) & (cls == 0))} of {np.sum(depth > 0)} "
              f"columns with a latent layer classed none")
        for name, ref in refs.items():
            ok = np.isfinite(cape) & np.isfinite(ref)
            ours, theirs = cape > 0, ref > 0
            big = ref >= 1000
            print(f"  vs NCEP {name} CAPE: CAPE > 0 in {theirs.sum()} (NCEP), {ours.sum()} (ours), "
                  f"{(ours & theirs).sum()} both ({100 * (ours & theirs).sum() / theirs.sum():.0f} % of NCEP's); "
                  f"correlation {np.corrcoef(cape[ok], ref[ok])[0, 1]:.3f}; "
                  f"median ours/NCEP where NCEP >= 1000 J/kg ({big.sum()} columns) {np.nanmedian(cape[big] / ref[big]):.2f}; "
                  f"largest {np.nanmax(cape):.0f} vs {np.nanmax(ref):.0f} J/kg")
PY
