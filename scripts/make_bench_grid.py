#!/usr/bin/python3
"""Write a global 0.25 degree benchmark input: 1440 x 721 columns, 37 pressure levels,
T (K), q (kg/kg), z (geopotential, m2 s-2), float32, one time step, laid out like a
reanalysis download (time, level, latitude, longitude; latitude 90 -> -90; levels in hPa
ascending). Synthetic air masses (tropics moist and latently unstable, polar air stable,
planetary waves so that columns differ); not for checking values.

Usage: /usr/bin/python3 scripts/make_bench_grid.py OUTPUT.nc [--deflate] [--resolution DEG] [--steps N]
"""
import argparse

import numpy as np
import netCDF4

RD, RV, G = 287.04, 461.5, 9.80665
EPS = RD / RV
LEVELS_HPA = np.array([1, 2, 3, 5, 7, 10, 20, 30, 50, 70, 100, 125, 150, 175, 200, 225, 250, 300, 350, 400,
                       450, 500, 550, 600, 650, 700, 750, 775, 800, 825, 850, 875, 900, 925, 950, 975, 1000.0])
BAND = 40  # latitude rows generated at a time (bounded memory)


def band_state(lat, lon):
    """T, q, z of a band of rows: arrays (level ascending, rows, lon)."""
    phi = np.radians(lat)[None, :, None]
    lam = np.radians(lon)[None, None, :]
    p = LEVELS_HPA[:, None, None]
    wave = np.cos(4 * lam + 2 * phi) * np.cos(phi) + 0.5 * np.sin(7 * lam - 3 * phi) * np.cos(phi) ** 2
    t_sfc = 297.0 - 50.0 * np.sin(phi - np.radians(-5.0)) ** 2 + 3.0 * wave
    lapse = 6.3 - 2.0 * np.sin(phi) ** 2 + 0.4 * wave
    t_trop = 196.0 + 22.0 * np.sin(phi) ** 2
    t = t_sfc * (p / 1000.0) ** (RD * lapse * 1e-3 / G)
    t = t_trop + 1.5 * np.logaddexp(0.0, (t - t_trop) / 1.5)
    t = np.where(p < 100.0, t + 12.0 * np.log(100.0 / p) / np.log(1000.0), t)   # warming stratosphere
    tropics = np.exp(-((np.degrees(phi) + 5.0 + 5.0 * wave) / 18.0) ** 2)
    rh_moist = np.interp(p, [1, 100, 300, 500, 700, 850, 1000], [0.01, 0.10, 0.40, 0.50, 0.60, 0.80, 0.85])
    rh_dry = np.interp(p, [1, 100, 300, 500, 700, 850, 1000], [0.01, 0.10, 0.20, 0.25, 0.30, 0.55, 0.70])
    rh = tropics * rh_moist + (1.0 - tropics) * rh_dry
    tc = t - 273.15
    e = np.minimum(rh * 6.112 * np.exp(17.67 * tc / (tc + 243.5)), 0.2 * p)
    q = EPS * e / (p - (1.0 - EPS) * e)
    tv = t * (1.0 + (1.0 / EPS - 1.0) * q)
    z = np.empty_like(t)
    z[-1] = 100.0 + 60.0 * wave[0]
    for k in range(len(LEVELS_HPA) - 2, -1, -1):
        z[k] = z[k + 1] + RD * 0.5 * (tv[k] + tv[k + 1]) / G * np.log(LEVELS_HPA[k + 1] / LEVELS_HPA[k])
    return t.astype(np.float32), q.astype(np.float32), (z * G).astype(np.float32)


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("output", help="NetCDF file to write (about 460 MB uncompressed)")
    parser.add_argument("--deflate", action="store_true", help="deflate the fields, chunked by level")
    parser.add_argument("--resolution", type=float, default=0.25,
                        help="grid spacing in degrees (default 0.25; 0.5 gives 720 x 361 columns)")
    parser.add_argument("--steps", type=int, default=1,
                        help="time steps, 6 h apart (default 1; later steps shift the waves eastward)")
    args = parser.parse_args()
    path, deflate = args.output, args.deflate
    n_lat = int(round(180.0 / args.resolution)) + 1
    n_lon = int(round(360.0 / args.resolution))
    lat = np.linspace(90.0, -90.0, n_lat)
    lon = np.arange(n_lon) * args.resolution
    ds = netCDF4.Dataset(path, "w", format="NETCDF4")
    ds.Conventions = "CF-1.8"
    ds.title = "latentlift benchmark input (synthetic, global 0.25 degree, 37 levels)"
    ds.createDimension("time", args.steps)
    ds.createDimension("level", len(LEVELS_HPA))
    ds.createDimension("latitude", len(lat))
    ds.createDimension("longitude", len(lon))
    v = ds.createVariable("time", "i4", ("time",))
    v.standard_name, v.units, v.calendar = "time", "hours since 2031-01-01 00:00:00", "gregorian"
    v[:] = np.arange(args.steps) * 6
    v = ds.createVariable("level", "i4", ("level",))
    v.long_name, v.units = "pressure_level", "millibars"
    v[:] = LEVELS_HPA.astype(np.int32)
    v = ds.createVariable("latitude", "f4", ("latitude",))
    v.standard_name, v.units = "latitude", "degrees_north"
    v[:] = lat
    v = ds.createVariable("longitude", "f4", ("longitude",))
    v.standard_name, v.units = "longitude", "degrees_east"
    v[:] = lon
    dims = ("time", "level", "latitude", "longitude")
    kw = dict(zlib=True, complevel=1, shuffle=True, chunksizes=(1, 1, n_lat, n_lon)) if deflate else dict(contiguous=True)
    vt = ds.createVariable("t", "f4", dims, **kw)
    vt.standard_name, vt.units, vt.long_name = "air_temperature", "K", "Temperature"
    vq = ds.createVariable("q", "f4", dims, **kw)
    vq.standard_name, vq.units, vq.long_name = "specific_humidity", "kg kg**-1", "Specific humidity"
    vz = ds.createVariable("z", "f4", dims, **kw)
    vz.standard_name, vz.units, vz.long_name = "geopotential", "m**2 s**-2", "Geopotential"
    for step in range(args.steps):
        for r0 in range(0, len(lat), BAND):
            r1 = min(r0 + BAND, len(lat))
            t, q, z = band_state(lat[r0:r1], lon - 7.5 * step)
            vt[step, :, r0:r1, :] = t
            vq[step, :, r0:r1, :] = q
            vz[step, :, r0:r1, :] = z
    ds.close()


if __name__ == "__main__":
    main()
