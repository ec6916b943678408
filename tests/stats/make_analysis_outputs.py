#!/usr/bin/python3
"""Write NetCDF files shaped like `latentlift analyze` outputs (invented values) for the
climatology tests: several files, several valid times each, on a small projected grid.

usage: make_analysis_outputs.py OUTDIR [--files N] [--times N] [--ny N] [--nx N]
                                [--levels N] [--start YYYY-MM-DD] [--step-hours H]
                                [--seed S] [--prefix NAME] [--bad-class-at FILE:TIME]
"""
import argparse
import datetime as dt
import os

import numpy as np
import netCDF4

FIELDS = {  # name: units (DESIGN output table)
    "latent_layer_depth": "hPa",
    "mu_cape": "J kg-1",
    "mu_cin": "J kg-1",
    "mu_lift_to_lfc": "hPa",
    "easiest_lift": "hPa",
}
FILL = np.float32(9.96921e36)


def synth_step(rng, ny, nx, nlev):
    """One time step of invented fields with the shapes and missing-value patterns of analyze output."""
    n = ny * nx
    cls = rng.choice([0, 1, 2], size=n, p=[0.45, 0.25, 0.30]).astype(np.int8)
    missing = rng.random(n) < 0.05           # columns not analysed
    cls[missing] = -1
    depth = np.where(cls >= 0, np.where(rng.random(n) < 0.4, 0.0, rng.gamma(1.5, 40.0, n)), np.nan)
    depth[rng.random(n) < 0.05] = 20.0       # exactly on a bin edge
    cape = np.where(cls >= 1, rng.gamma(0.9, 900.0, n), np.where(cls == 0, 0.0, np.nan))
    cape[(cls >= 1) & (rng.random(n) < 0.02)] = 9500.0   # beyond the last edge (overflow bin)
    cin = np.where(cls >= 1, rng.gamma(1.2, 60.0, n), np.nan)
    cin[(cls >= 1) & (rng.random(n) < 0.05)] = 0.0
    lift = np.where(cls >= 1, rng.gamma(2.0, 60.0, n), np.nan)
    easiest = np.where(cls >= 1, lift * rng.random(n), np.nan)
    fields = {"latent_layer_depth": depth, "mu_cape": cape, "mu_cin": cin,
              "mu_lift_to_lfc": lift, "easiest_lift": easiest}
    fields = {k: v.astype(np.float32).reshape(ny, nx) for k, v in fields.items()}
    stab = None
    if nlev:
        stab = rng.integers(0, 5, size=(nlev, ny, nx)).astype(np.int8)
        stab[-1] = -1                         # the top level has no layer above
        stab[:, missing.reshape(ny, nx)] = -1
    return cls.reshape(ny, nx), fields, stab


def write_file(path, times, ny, nx, nlev, rng, settings, bad_time=None):
    with netCDF4.Dataset(path, "w", format="NETCDF4") as nc:
        nc.Conventions = "CF-1.8"
        nc.title = "invented analyze output for the climatology tests"
        nc.latentlift_settings = settings
        nc.createDimension("time", None)
        nc.createDimension("y", ny)
        nc.createDimension("x", nx)
        t = nc.createVariable("time", "f8", ("time",))
        t.standard_name = "time"
        t.units = "hours since 2000-01-01 00:00:00"
        t.calendar = "standard"
        t[:] = netCDF4.date2num(times, t.units, t.calendar)
        y = nc.createVariable("y", "f8", ("y",))
        y.standard_name = "projection_y_coordinate"
        y.units = "m"
        y[:] = np.arange(ny) * 25000.0
        x = nc.createVariable("x", "f8", ("x",))
        x.standard_name = "projection_x_coordinate"
        x.units = "m"
        x[:] = np.arange(nx) * 25000.0
        lat = nc.createVariable("lat", "f8", ("y", "x"))
        lat.standard_name = "latitude"
        lat.units = "degrees_north"
        lat[:] = 40.0 + np.add.outer(np.arange(ny) * 0.22, np.zeros(nx))
        lon = nc.createVariable("lon", "f8", ("y", "x"))
        lon.standard_name = "longitude"
        lon.units = "degrees_east"
        lon[:] = 5.0 + np.add.outer(np.zeros(ny), np.arange(nx) * 0.3)
        crs = nc.createVariable("crs", "i4")
        crs.grid_mapping_name = "lambert_conformal_conic"
        crs.standard_parallel = [35.0, 45.0]
        crs.longitude_of_central_meridian = 8.0
        crs.latitude_of_projection_origin = 40.0
        if nlev:
            nc.createDimension("pressure", nlev)
            p = nc.createVariable("pressure", "f8", ("pressure",))
            p.standard_name = "air_pressure"
            p.units = "hPa"
            p[:] = np.linspace(1000.0, 1000.0 - 50.0 * (nlev - 1), nlev)
        vars_ = {}
        for name, units in FIELDS.items():
            v = nc.createVariable(name, "f4", ("time", "y", "x"), fill_value=FILL)
            v.units = units
            v.grid_mapping = "crs"
            v.coordinates = "lat lon"
            vars_[name] = v
        cls_var = nc.createVariable("latent_class", "i1", ("time", "y", "x"), fill_value=np.int8(-1))
        cls_var.flag_values = np.array([0, 1, 2], dtype=np.int8)
        cls_var.flag_meanings = "none pseudo_latent real_latent"
        cls_var.grid_mapping = "crs"
        cls_var.coordinates = "lat lon"
        if nlev:
            st = nc.createVariable("stability_class", "i1", ("time", "pressure", "y", "x"), fill_value=np.int8(-1))
            st.grid_mapping = "crs"
            st.coordinates = "lat lon"
        for k in range(len(times)):
            cls, fields, stab = synth_step(rng, ny, nx, nlev)
            if bad_time == k:
                cls[0, 0] = 7                   # not a latent class: the reader must refuse it
            cls_var[k] = cls
            for name, values in fields.items():
                vars_[name][k] = np.ma.masked_invalid(values)
            if nlev:
                nc["stability_class"][k] = stab


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("outdir")
    ap.add_argument("--files", type=int, default=3)
    ap.add_argument("--times", type=int, default=4)
    ap.add_argument("--ny", type=int, default=6)
    ap.add_argument("--nx", type=int, default=7)
    ap.add_argument("--levels", type=int, default=0)
    ap.add_argument("--start", default="2001-11-20")
    ap.add_argument("--step-hours", type=float, default=7 * 24 + 5)  # a week and 5 hours: months, seasons, hours vary
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--prefix", default="analysis")
    ap.add_argument("--buoyancy", default="virtual")
    ap.add_argument("--mu-parcel", default="max_cape",
                    help='analysis.mu_parcel recorded in the settings; "none": not recorded (older outputs)')
    ap.add_argument("--bad-class-at", default="", help="FILE:TIME indices of a step with an invalid latent_class")
    a = ap.parse_args()
    os.makedirs(a.outdir, exist_ok=True)
    rng = np.random.default_rng(a.seed)
    start = dt.datetime.fromisoformat(a.start)
    mu_parcel = '' if a.mu_parcel == "none" else 'mu_parcel = "%s"\n' % a.mu_parcel
    settings = ('[analysis]\nbuoyancy = "%s"\ntop_pressure_hpa = 100\nsource_layer_hpa = 300\n'
                'min_excess_k = 0.01\n%s\n[run]\nthreads = 0\n' % (a.buoyancy, mu_parcel))
    bad = tuple(int(v) for v in a.bad_class_at.split(":")) if a.bad_class_at else (-1, -1)
    for f in range(a.files):
        times = [start + dt.timedelta(hours=a.step_hours * (f * a.times + k)) for k in range(a.times)]
        path = os.path.join(a.outdir, "%s_%02d.nc" % (a.prefix, f))
        write_file(path, times, a.ny, a.nx, a.levels, rng, settings, bad[1] if bad[0] == f else None)
        print(path)


if __name__ == "__main__":
    main()
