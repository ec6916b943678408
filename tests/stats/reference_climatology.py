#!/usr/bin/python3
"""Independent NumPy check of a latentlift climatology file against the per-time inputs.

usage: reference_climatology.py STATS.nc INPUT.nc...

Reads every time step of the inputs (analyze outputs), groups the valid times with
cftime's calendar decoding (CF standard calendar), and recomputes per grid point and
group: count, latent and real-latent frequency, and for each field the defined count,
mean (numpy.mean), standard deviation (numpy.std, ddof=1), maximum, histogram
(numpy.searchsorted on the bin edges recorded in the file) and the p50/p90/p99 by the
documented rule (linear within the bin holding rank q/100 n; point-mass bin -> its
edge; overflow bin up to the maximum; capped at the maximum). Also checks the CF
metadata. Prints OK, or the mismatches and exits 1.
"""
import sys

import numpy as np
import netCDF4

FIELDS = ["latent_layer_depth", "mu_cape", "mu_cin", "mu_lift_to_lfc", "easiest_lift"]
SEASON = {12: 0, 1: 0, 2: 0, 3: 1, 4: 1, 5: 1, 6: 2, 7: 2, 8: 2, 9: 3, 10: 3, 11: 3}
errors = []


def fail(msg):
    errors.append(msg)


def group_of(group_by, d):
    return {"all": 0, "month": d.month - 1, "season": SEASON[d.month], "hour": d.hour}[group_by]


def percentile(counts, edges, vmax, q):
    n = counts.sum()
    if n == 0:
        return np.nan
    rank = q / 100.0 * n
    cum = np.cumsum(counts)
    k = int(np.argmax((cum >= rank) & (counts > 0)))
    if k == 0:
        return min(edges[0], vmax)
    lo = edges[k - 1]
    hi = edges[k] if k < len(edges) else vmax
    below = cum[k] - counts[k]
    return min(lo + (rank - below) / counts[k] * (hi - lo), vmax)


def main():
    stats_path, inputs = sys.argv[1], sys.argv[2:]
    st = netCDF4.Dataset(stats_path)
    st.set_auto_mask(False)
    group_by = st.group_by
    n_groups = {"all": 1, "month": 12, "season": 4, "hour": 24}[group_by]

    # ---- per-time inputs -------------------------------------------------------------
    samples = {f: [[] for _ in range(n_groups)] for f in FIELDS}
    classes = [[] for _ in range(n_groups)]
    stab = [[] for _ in range(n_groups)]
    valid = []
    for path in inputs:
        with netCDF4.Dataset(path) as nc:
            t = nc["time"]
            dates = netCDF4.num2date(t[:], t.units, getattr(t, "calendar", "standard"),
                                     only_use_cftime_datetimes=False)
            for k, d in enumerate(dates):
                g = group_of(group_by, d)
                valid.append(d)
                for f in FIELDS:
                    samples[f][g].append(np.ma.filled(nc[f][k].astype(np.float64), np.nan).ravel())
                classes[g].append(np.ma.filled(nc["latent_class"][k], -1).astype(int).ravel())
                if "stability_class" in nc.variables:
                    stab[g].append(np.ma.filled(nc["stability_class"][k], -1).astype(int))

    # ---- counts and frequencies --------------------------------------------------------
    count = st["count"][:].reshape(n_groups, -1)
    lf = st["latent_frequency"][:].reshape(n_groups, -1)
    rlf = st["real_latent_frequency"][:].reshape(n_groups, -1)
    for g in range(n_groups):
        if not classes[g]:
            if count[g].any():
                fail("group %d: counts without time steps" % g)
            continue
        c = np.array(classes[g])
        n = (c >= 0).sum(axis=0)
        if not np.array_equal(count[g], n):
            fail("count differs in group %d" % g)
        with np.errstate(invalid="ignore", divide="ignore"):
            ref_lf = np.where(n > 0, (c >= 1).sum(axis=0) / n, np.nan)
            ref_rlf = np.where(n > 0, (c == 2).sum(axis=0) / n, np.nan)
        got_lf = np.where(n > 0, lf[g], np.nan)
        got_rlf = np.where(n > 0, rlf[g], np.nan)
        if not np.allclose(got_lf, ref_lf, rtol=1e-6, equal_nan=True):
            fail("latent_frequency differs in group %d" % g)
        if not np.allclose(got_rlf, ref_rlf, rtol=1e-6, equal_nan=True):
            fail("real_latent_frequency differs in group %d" % g)

    # ---- per-field statistics ----------------------------------------------------------
    for f in FIELDS:
        bounds = st[f + "_bin_bounds"][:]
        edges = np.concatenate([[bounds[0, 1]], bounds[1:-1, 1]])  # e_0 .. e_K
        nb = len(edges) + 1
        hist = st[f + "_histogram"][:].reshape(n_groups, nb, -1)
        fcount = st[f + "_count"][:].reshape(n_groups, -1)
        stat = {s: st["%s_%s" % (f, s)][:].reshape(n_groups, -1) for s in
                ("mean", "std", "max", "p50", "p90", "p99")}
        for g in range(n_groups):
            if not samples[f][g]:
                continue
            x = np.array(samples[f][g])  # [time, point]
            defined = ~np.isnan(x)
            if not np.array_equal(fcount[g], defined.sum(axis=0)):
                fail("%s_count differs in group %d" % (f, g))
            for p in range(x.shape[1]):
                v = x[defined[:, p], p]
                if v.size == 0:
                    continue
                # bins: 0 for v <= e_0, k for e_{k-1} < v <= e_k, K+1 above e_K
                ref_hist = np.bincount(np.searchsorted(edges, v, side="left"), minlength=nb)
                if not np.array_equal(hist[g, :, p], ref_hist):
                    fail("%s_histogram differs at group %d point %d" % (f, g, p))
                checks = [("mean", np.mean(v), 1e-10), ("max", np.max(v), 0.0)]
                if v.size > 1:
                    checks.append(("std", np.std(v, ddof=1), 2e-6))
                for q in (50, 90, 99):
                    checks.append(("p%d" % q, percentile(ref_hist, edges, v.max(), q), 2e-6))
                    # and within one bin of NumPy's own percentile of the raw values
                    k = min(int(np.searchsorted(edges, np.percentile(v, q))), len(edges) - 1)
                    width = edges[k] - edges[k - 1] if k > 0 else edges[1] - edges[0]
                    if abs(stat["p%d" % q][g, p] - np.percentile(v, q)) > 2 * width + 1e-6 and v.size >= 20:
                        fail("%s_p%d far from numpy.percentile at group %d point %d" % (f, q, g, p))
                for name, ref, rtol in checks:
                    got = stat[name][g, p]
                    if not np.isclose(got, ref, rtol=rtol, atol=1e-9):
                        fail("%s_%s group %d point %d: %r, reference %r" % (f, name, g, p, got, ref))

    # ---- stability classes per level ---------------------------------------------------
    if "stability_class_count" in st.variables:
        scc = st["stability_class_count"][:]
        for g in range(n_groups):
            if not stab[g]:
                continue
            s = np.array(stab[g])  # [time, level, y, x]
            for cls in range(5):
                if not np.array_equal(scc[g, :, cls], (s == cls).sum(axis=0)):
                    fail("stability_class_count of class %d differs in group %d" % (cls, g))

    # ---- CF metadata ---------------------------------------------------------------
    vt = netCDF4.num2date(st["valid_time"][:], st["valid_time"].units, "standard",
                          only_use_cftime_datetimes=False)
    if sorted(vt) != sorted(valid):
        fail("valid_time does not list the input times")
    time = st["time"]
    if group_by == "all":
        if getattr(time, "bounds", "") != "time_bnds":
            fail("time lacks bounds")
    elif getattr(time, "climatology", "") != "climatology_bounds":
        fail("time lacks the climatology attribute (CF 7.4)")
    method = st["mu_cape_max"].cell_methods
    if not method.startswith("time: maximum"):
        fail("mu_cape_max cell_methods is %r" % method)
    if list(st["group_label"][:])[0] != {"all": "all", "month": "Jan", "season": "DJF", "hour": "00UTC"}[group_by]:
        fail("group_label")
    if st.Conventions != "CF-1.8":
        fail("Conventions")

    if errors:
        print("\n".join(errors[:30]))
        print("%d mismatches" % len(errors))
        sys.exit(1)
    print("OK")


if __name__ == "__main__":
    main()
