#!/usr/bin/python3
"""Compare two latentlift climatology files: counts, histograms, maxima, valid times and
percentiles identical; means, M2 and standard deviations within floating-point rounding.

usage: compare_stats.py [--statistics-only] A.nc B.nc   (prints OK, or the differences and exits 1)
  --statistics-only  ignore grid variables copied from the inputs (coordinates, grid mapping)
"""
import sys

import numpy as np
import netCDF4

EXACT_SUFFIXES = ("count", "_histogram", "_max", "_p50", "_p90", "_p99", "_frequency")
ROUNDING = {"_mean": 1e-11, "_m2": 1e-9, "_std": 1e-6}


def main():
    args = sys.argv[1:]
    statistics_only = "--statistics-only" in args
    args = [x for x in args if x != "--statistics-only"]
    a, b = netCDF4.Dataset(args[0]), netCDF4.Dataset(args[1])
    a.set_auto_mask(False)
    b.set_auto_mask(False)
    errors = []

    def names(ds):
        if not statistics_only:
            return set(ds.variables)
        return {n for n, v in ds.variables.items()
                if "group" in v.dimensions or n == "valid_time" or n.endswith("_bin") or n.endswith("_bin_bounds")}

    if names(a) != names(b):
        errors.append("variables differ: %s" % sorted(names(a) ^ names(b)))
    for name in sorted(names(a) & names(b)):
        x, y = a[name][:], b[name][:]
        if x.shape != y.shape:
            errors.append("%s: shapes %s and %s" % (name, x.shape, y.shape))
            continue
        if x.dtype.kind in "OSU":
            if list(x.ravel()) != list(y.ravel()):
                errors.append("%s differs" % name)
            continue
        if name == "valid_time":
            x, y = np.sort(x), np.sort(y)
        tol = next((t for s, t in ROUNDING.items() if name.endswith(s)), None)
        if tol is None:
            if not np.array_equal(x, y, equal_nan=x.dtype.kind == "f"):
                errors.append("%s differs (exact comparison): %d values" % (name, np.sum(x != y)))
        elif not np.allclose(x, y, rtol=tol, atol=1e-12):
            errors.append("%s differs beyond rounding (rtol %g): max %g" % (name, tol, np.max(np.abs(x - y))))
    for att in ("group_by", "horizontal_dimensions", "time_steps"):
        if getattr(a, att, None) != getattr(b, att, None):
            errors.append("attribute %s differs" % att)
    if errors:
        print("\n".join(errors))
        sys.exit(1)
    print("OK")


if __name__ == "__main__":
    main()
