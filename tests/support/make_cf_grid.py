"""Writes a small NetCDF file laid out like a latentlift analyze output (DESIGN.md):
2-D fields per time step on a projected, rotated-pole, lat/lon or unstructured grid.

Fields (formulas known to the tests):
  mu_cape(time, y, x)            = 1000 + 500 sin(x / lx) cos(y / ly) + 10 t   [J kg-1]
  latent_layer_depth(time, y, x) = 100 + i + 2 j, missing where i < 2 and j < 2 [hPa]
  latent_class(time, y, x)       = (i // 3 + j // 3) % 3  (byte flags 0, 1, 2)
Options change these for particular tests (--constant, --outlier, --class-missing-corner) or write a
climatology by season instead (--groups).
x, y are the native coordinates (m, or degrees for lat/lon and rotated pole);
i, j the column and row indices.
"""
import argparse
import json

import netCDF4
import numpy as np

MAPPINGS = {
    "latitude_longitude": dict(grid_mapping_name="latitude_longitude",
                               semi_major_axis=6378137.0, inverse_flattening=298.257223563),
    "lambert_conformal_conic": dict(grid_mapping_name="lambert_conformal_conic",
                                    standard_parallel=[30.0, 60.0], longitude_of_central_meridian=10.0,
                                    latitude_of_projection_origin=45.0, false_easting=0.0,
                                    false_northing=0.0, earth_radius=6371229.0),
    "polar_stereographic": dict(grid_mapping_name="polar_stereographic",
                                straight_vertical_longitude_from_pole=-45.0,
                                latitude_of_projection_origin=90.0, standard_parallel=70.0,
                                false_easting=0.0, false_northing=0.0,
                                semi_major_axis=6378137.0, inverse_flattening=298.257223563),
    "rotated_latitude_longitude": dict(grid_mapping_name="rotated_latitude_longitude",
                                       grid_north_pole_latitude=40.0, grid_north_pole_longitude=-170.0,
                                       earth_radius=6371229.0),
    "mercator": dict(grid_mapping_name="mercator", longitude_of_projection_origin=20.0,
                     standard_parallel=10.0, false_easting=0.0, false_northing=0.0,
                     semi_major_axis=6378137.0, inverse_flattening=298.257223563),
    "transverse_mercator": dict(grid_mapping_name="transverse_mercator",
                                scale_factor_at_central_meridian=0.9996, longitude_of_central_meridian=15.0,
                                latitude_of_projection_origin=0.0, false_easting=500000.0,
                                false_northing=0.0, semi_major_axis=6378137.0,
                                inverse_flattening=298.257223563),
    "lambert_azimuthal_equal_area": dict(grid_mapping_name="lambert_azimuthal_equal_area",
                                         longitude_of_projection_origin=10.0,
                                         latitude_of_projection_origin=52.0, false_easting=4321000.0,
                                         false_northing=3210000.0, semi_major_axis=6378137.0,
                                         inverse_flattening=298.257223563),
}
# Default native grid origins/spacings per mapping (x0, dx, y0, dy).
GRIDS = {
    "latitude_longitude": (0.0, 0.5, 40.0, 0.5),
    "none": (0.0, 0.5, 40.0, 0.5),
    "unstructured": (0.0, 0.5, 40.0, 0.5),
    "rotated_latitude_longitude": (-5.0, 0.25, -4.0, 0.25),
    "polar_stereographic": (-600e3, 20e3, -2400e3, 20e3),
    "transverse_mercator": (300e3, 20e3, 5000e3, 20e3),
    "lambert_azimuthal_equal_area": (4000e3, 20e3, 3000e3, 20e3),
}


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--mapping", required=True)
    p.add_argument("--out", required=True)
    p.add_argument("--nx", type=int, default=24)
    p.add_argument("--ny", type=int, default=18)
    p.add_argument("--grid", type=float, nargs=4, help="x0 dx y0 dy")
    p.add_argument("--attrs", default="{}", help="JSON: grid_mapping attributes to add or replace")
    p.add_argument("--lx", type=float, default=None)
    p.add_argument("--ly", type=float, default=None)
    p.add_argument("--times", type=int, default=2)
    p.add_argument("--constant", type=float, default=None, help="mu_cape = this value everywhere")
    p.add_argument("--outlier", type=float, default=None, help="mu_cape = this value in cell (0, 0)")
    p.add_argument("--class-missing-corner", action="store_true",
                   help="latent_class missing in cell (0, 0): that column was not analysed")
    p.add_argument("--groups", action="store_true",
                   help="a climatology by season: dimension group (DJF MAM JJA SON) instead of time, "
                        "mu_cape_mean = 100 (g + 1) and count = 5")
    a = p.parse_args()

    x0, dx, y0, dy = a.grid or GRIDS.get(a.mapping, (-200e3, 20e3, -150e3, 20e3))
    x = x0 + dx * np.arange(a.nx)
    y = y0 + dy * np.arange(a.ny)
    lx = a.lx or (a.nx * abs(dx)) / 3.0
    ly = a.ly or (a.ny * abs(dy)) / 2.0
    jj, ii = np.meshgrid(np.arange(a.ny), np.arange(a.nx), indexing="ij")
    yy, xx = np.meshgrid(y, x, indexing="ij")

    with netCDF4.Dataset(a.out, "w", format="NETCDF4") as ds:
        ds.Conventions = "CF-1.8"
        ds.title = "latentlift analysis (test grid)"
        ds.setncattr("analysis_buoyancy", "virtual")
        if a.groups:
            a.times = 4
            ds.createDimension("group", 4)
            g = ds.createVariable("group", "i4", ("group",))
            g[:] = np.arange(4)
            labels = ds.createVariable("group_label", str, ("group",))
            for k, name in enumerate(["DJF", "MAM", "JJA", "SON"]):
                labels[k] = name
            ds.group_by = "season"
            ds.time_coverage_start = "2031-01-01T00:00:00Z"
            ds.time_coverage_end = "2031-12-31T18:00:00Z"
        else:
            ds.createDimension("time", a.times)
            t = ds.createVariable("time", "f8", ("time",))
            t.standard_name = "time"
            t.units = "hours since 2031-07-14 00:00:00"
            t.calendar = "standard"
            t[:] = 6.0 * np.arange(a.times)
        lead = "group" if a.groups else "time"
        unstructured = a.mapping == "unstructured"
        if unstructured:
            ds.createDimension("cell", a.nx * a.ny)
            rng = np.random.default_rng(7)
            lon = ds.createVariable("lon", "f8", ("cell",))
            lat = ds.createVariable("lat", "f8", ("cell",))
            lon.standard_name, lon.units = "longitude", "degrees_east"
            lat.standard_name, lat.units = "latitude", "degrees_north"
            xx = (xx + rng.uniform(-0.2, 0.2, xx.shape) * dx).ravel()
            yy = (yy + rng.uniform(-0.2, 0.2, yy.shape) * dy).ravel()
            ii, jj = ii.ravel(), jj.ravel()
            lon[:], lat[:] = xx, yy
            dims = (lead, "cell")
        else:
            geographic = a.mapping in ("latitude_longitude", "none")
            rotated = a.mapping == "rotated_latitude_longitude"
            xname, yname = ("lon", "lat") if geographic else (("rlon", "rlat") if rotated else ("x", "y"))
            ds.createDimension(yname, a.ny)
            ds.createDimension(xname, a.nx)
            xv = ds.createVariable(xname, "f8", (xname,))
            yv = ds.createVariable(yname, "f8", (yname,))
            xv[:], yv[:] = x, y
            if geographic:
                xv.standard_name, xv.units = "longitude", "degrees_east"
                yv.standard_name, yv.units = "latitude", "degrees_north"
            elif rotated:
                xv.standard_name, xv.units = "grid_longitude", "degrees"
                yv.standard_name, yv.units = "grid_latitude", "degrees"
            else:
                xv.standard_name, xv.units = "projection_x_coordinate", "m"
                yv.standard_name, yv.units = "projection_y_coordinate", "m"
            xv.axis, yv.axis = "X", "Y"
            dims = (lead, yname, xname)
        if a.mapping not in ("none", "unstructured"):
            crs = ds.createVariable("crs", "i4")
            attrs = dict(MAPPINGS[a.mapping])
            attrs.update(json.loads(a.attrs))
            crs.setncatts({k: v for k, v in attrs.items() if v is not None})

        def field(name, dtype, units, long_name, fill):
            v = ds.createVariable(name, dtype, dims, fill_value=fill) if fill is not None else \
                ds.createVariable(name, dtype, dims)
            v.units = units
            v.long_name = long_name
            if a.mapping not in ("none", "unstructured"):
                v.grid_mapping = "crs"
            if unstructured:
                v.coordinates = "lat lon"
            return v

        if a.groups:
            mean = field("mu_cape_mean", "f4", "J kg-1", "mean of the CAPE of the most-unstable parcel",
                         np.float32(9.96921e36))
            count = field("count", "u4", "1", "number of valid time steps", None)
            for k in range(4):
                mean[k] = np.full(xx.shape, 100.0 * (k + 1))
                count[k] = np.full(xx.shape, 5)
            return
        cape = field("mu_cape", "f4", "J kg-1", "CAPE of the most-unstable parcel", np.float32(9.96921e36))
        depth = field("latent_layer_depth", "f4", "hPa", "total depth of latently unstable layers",
                      np.float32(9.96921e36))
        klass = field("latent_class", "i1", "1", "latent instability class of the most-unstable parcel",
                      np.int8(-127))
        klass.flag_values = np.array([0, 1, 2], dtype=np.int8)
        klass.flag_meanings = "none pseudo_latent real_latent"
        for k in range(a.times):
            c = 1000.0 + 500.0 * np.sin(xx / lx) * np.cos(yy / ly) + 10.0 * k
            if a.constant is not None:
                c = np.full(xx.shape, a.constant)
            if a.outlier is not None:
                c = np.array(c, dtype=float)
                c.flat[0] = a.outlier
            cape[k] = c
            d = (100.0 + ii + 2.0 * jj).astype(np.float32)
            d = np.ma.masked_where((ii < 2) & (jj < 2), d)
            depth[k] = d
            kl = ((ii // 3 + jj // 3) % 3).astype(np.int8)
            if a.class_missing_corner:
                kl = np.ma.masked_where((ii < 1) & (jj < 1), kl)
            klass[k] = kl


if __name__ == "__main__":
    main()
