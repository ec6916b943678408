#!/usr/bin/python3
"""Regenerate the demo inputs in sample_grids/ (an invented scenario; see sample_grids/README.md).

Usage: /usr/bin/python3 scripts/make_sample_grids.py [OUTPUT_DIR]     (default: sample_grids/)

Writes two CF NetCDF-4 files with different conventions:
  vessaline_coast_lcc.nc  regional model, Lambert conformal grid, 3 time steps, 27 levels
                          in hPa (1000 first), T (K), specific humidity (kg/kg),
                          geopotential height (m), surface pressure (Pa); levels below
                          the plateau's ground are extrapolated and marked by surface pressure.
  aurel_global_5deg.nc    coarse global lat/lon grid (5 degrees), 2 time steps, 17 levels in
                          Pa ascending, T (K), relative humidity (%), geopotential (m2 s-2),
                          surface pressure (Pa); levels below ground hold _FillValue.
The fields are smooth analytic air masses made hydrostatically consistent (hypsometric
equation with virtual temperature); humidity comes from a relative-humidity profile through
Bolton's (1980) saturation vapour pressure. The output is deterministic.
"""
import argparse
import os

import numpy as np
import netCDF4

RD = 287.04        # J kg-1 K-1
RV = 461.5
EPS = RD / RV
G = 9.80665        # m s-2
EARTH_RADIUS = 6371229.0  # m, sphere
FILL = np.float32(9.96921e36)


# ----------------------------------------------------------------------------- thermodynamics
def saturation_vapour_pressure_hpa(temp_k):
    """Bolton (1980, eq. 10) over liquid water, hPa."""
    t = temp_k - 273.15
    return 6.112 * np.exp(17.67 * t / (t + 243.5))


def specific_humidity(rh_fraction, temp_k, p_hpa):
    e = rh_fraction * saturation_vapour_pressure_hpa(temp_k)
    e = np.minimum(e, 0.5 * p_hpa)
    return EPS * e / (p_hpa - (1.0 - EPS) * e)


def virtual_temperature(temp_k, q):
    return temp_k * (1.0 + (1.0 / EPS - 1.0) * q)


def lapse_profile(t_ref_k, lapse_k_per_km, t_trop_k, p_hpa, p_ref_hpa=1000.0):
    """Constant lapse rate in height written in pressure (standard-atmosphere form),
    joined smoothly to an isothermal stratosphere at t_trop_k."""
    exponent = RD * lapse_k_per_km * 1e-3 / G
    t = t_ref_k * (p_hpa / p_ref_hpa) ** exponent
    # smooth maximum with the tropopause temperature (width 1.5 K)
    width = 1.5
    return t_trop_k + width * np.logaddexp(0.0, (t - t_trop_k) / width)


def heights_from_pressure(p_levels_hpa, tv, z_bottom):
    """Hypsometric integration upward from the first (highest-pressure) level.
    p_levels_hpa descending; tv[..., level]; z_bottom[...] at the first level."""
    z = np.empty_like(tv)
    z[..., 0] = z_bottom
    for k in range(1, len(p_levels_hpa)):
        tv_mean = 0.5 * (tv[..., k - 1] + tv[..., k])
        z[..., k] = z[..., k - 1] + RD * tv_mean / G * np.log(p_levels_hpa[k - 1] / p_levels_hpa[k])
    return z


def surface_pressure(p_levels_hpa, z, tv, terrain_m):
    """Pressure (hPa) where the geopotential height profile reaches the terrain height;
    log-linear between levels, hydrostatic extrapolation below the first level."""
    ln_p = np.log(p_levels_hpa)
    sp = np.empty(terrain_m.shape)
    flat_z = z.reshape(-1, z.shape[-1])
    flat_tv = tv.reshape(-1, tv.shape[-1])
    flat_h = terrain_m.reshape(-1)
    out = sp.reshape(-1)
    for i in range(flat_h.size):
        zc, h = flat_z[i], flat_h[i]
        if h <= zc[0]:
            out[i] = p_levels_hpa[0] * np.exp(G * (zc[0] - h) / (RD * flat_tv[i, 0]))
        else:
            out[i] = np.exp(np.interp(h, zc, ln_p))
    return sp


def smooth_step(x):
    return 0.5 * (1.0 + np.tanh(x))


def capping_layer(p_hpa, base_hpa, amplitude_k, decay=0.35):
    """Warming of an elevated inversion: rises over ~20 hPa above base_hpa to amplitude_k, then
    fades slowly upward (decay in ln p), so the air above the cap is steep but never superadiabatic."""
    rise = smooth_step(np.log(base_hpa / p_hpa) / 0.012 - 1.5)
    fade = np.exp(-np.maximum(np.log(0.975 * base_hpa / p_hpa), 0.0) / decay)
    return amplitude_k * rise * fade


def surface_inversion(p_hpa, sfc_hpa, amplitude_k, depth=0.08):
    """Cooling of the air next to the ground (a surface-based inversion), fading upward."""
    return -amplitude_k * np.exp(-np.maximum(np.log(sfc_hpa / p_hpa), 0.0) / depth)


# ----------------------------------------------------------------------------- regional grid
def lcc_inverse(x, y, lat0, lon0, lat1, lat2, radius):
    """Spherical Lambert conformal conic, inverse (Snyder 1987, USGS PP 1395, eqs. 15-1 to 15-3, 14-10, 14-11)."""
    phi0, phi1, phi2 = np.radians([lat0, lat1, lat2])
    n = np.log(np.cos(phi1) / np.cos(phi2)) / np.log(np.tan(np.pi / 4 + phi2 / 2) / np.tan(np.pi / 4 + phi1 / 2))
    f = np.cos(phi1) * np.tan(np.pi / 4 + phi1 / 2) ** n / n
    rho0 = radius * f / np.tan(np.pi / 4 + phi0 / 2) ** n
    rho = np.sign(n) * np.sqrt(x ** 2 + (rho0 - y) ** 2)
    theta = np.arctan2(x, rho0 - y)
    lat = 2.0 * np.arctan((radius * f / rho) ** (1.0 / n)) - np.pi / 2
    lon = np.radians(lon0) + theta / n
    return np.degrees(lat), (np.degrees(lon) + 180.0) % 360.0 - 180.0


REGIONAL_LEVELS_HPA = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 700, 650, 600,
                                550, 500, 450, 400, 350, 300, 250, 225, 200, 175, 150, 125, 100], dtype=float)


def regional_state(x_km, y_km, hour):
    """T (K), q (kg/kg), z (m) on REGIONAL_LEVELS_HPA and surface pressure (hPa), terrain (m)
    for one time step. x_km, y_km: 2-D grid in km (east, north)."""
    p = REGIONAL_LEVELS_HPA
    P = p[None, None, :]
    X = x_km[..., None]
    Y = y_km[..., None]
    # rough height of each pressure level (km) for front slopes and profiles
    z_approx = 7.6 * np.log(1000.0 / P)

    # coastline of the Umbrel Sea (south) and the Vessaline Coast; the Korrath Plateau inland (north-east)
    y_coast = -260.0 + 130.0 * np.sin(2 * np.pi * x_km / 1500.0)
    land = smooth_step((y_km - y_coast) / 40.0)
    r_plateau = np.hypot(x_km - 520.0, (y_km - 480.0) * 1.3)
    terrain = land * (120.0 + 0.25 * np.maximum(y_km - y_coast, 0.0)) + 2600.0 / (1.0 + (r_plateau / 380.0) ** 6)
    terrain = np.maximum(terrain * land, 0.0)

    # cold front moving east at 25 km/h, tilted back (west) with height 1:80; warm front to the north, tilted 1:150
    x_cf = -420.0 + 0.45 * y_km[..., None] + 25.0 * hour - 80.0 * z_approx
    w_cf = smooth_step((X - x_cf) / 70.0)            # 1 east of the cold front (warm side)
    y_wf = 620.0 - 0.35 * (x_km[..., None] + 600.0) + 20.0 * hour + 150.0 * z_approx
    w_wf = smooth_step((y_wf - Y) / 110.0)          # 1 south of the warm front
    warm = w_cf * w_wf
    cold = 1.0 - w_cf                                # the polar air behind the cold front
    cool = (1.0 - warm - cold).clip(0.0, 1.0)       # stable air north of the warm front

    # afternoon heating of the land in the warm sector (hour 6 and 12 are late morning and afternoon)
    heating = 2.5 * np.sin(np.pi * np.clip(hour - 2.0, 0.0, 14.0) / 14.0) * land[..., None]
    t_warm = lapse_profile(295.5 + heating - 0.0015 * np.maximum(Y, -600.0), 6.6, 212.0, P)
    # a dry capping inversion over the open sea in the south, strengthening southward
    cap = 6.0 * smooth_step((-500.0 - Y) / 150.0) * capping_layer(P, 955.0, 1.0)
    t_cool = lapse_profile(286.0, 5.2, 216.0, P)
    # polar air: surface inversion, then 4.8 K/km
    t_cold = lapse_profile(277.0, 4.8, 219.0, P) + surface_inversion(P, 1000.0, 3.0)
    temp_moist = warm * t_warm + cool * t_cool + cold * t_cold
    temp = temp_moist + warm * cap

    # relative humidity: moist warm sector, a saturated cloud band along the cold front, dry polar air
    rh_warm = np.interp(P, [100, 250, 400, 700, 850, 1000], [0.05, 0.12, 0.30, 0.45, 0.75, 0.83])
    rh_cool = np.interp(P, [100, 250, 400, 700, 850, 1000], [0.05, 0.20, 0.60, 0.85, 0.75, 0.75])
    rh_cold = np.interp(P, [100, 250, 400, 700, 850, 1000], [0.05, 0.15, 0.30, 0.30, 0.40, 0.60])
    rh = warm * rh_warm + cool * rh_cool + cold * rh_cold
    band = np.exp(-((X - x_cf - 60.0) / 90.0) ** 2) * (P >= 400.0)
    rh = rh + (0.97 - rh) * band * 0.9
    q = specific_humidity(rh, temp_moist, P)      # the cap is dry: humidity from the air below it
    q = np.where(P < 100.01, np.minimum(q, 4e-6), q)

    # mean-sea-level pressure: a low to the north-west, a high over the south-east sea
    x2, y2 = x_km - 80.0 * hour / 6.0, y_km
    mslp = (1014.0 - 22.0 * np.exp(-(np.hypot(x2 + 750.0, y2 - 820.0) / 700.0) ** 2)
            + 7.0 * np.exp(-(np.hypot(x_km - 1100.0, y_km + 900.0) / 900.0) ** 2))
    tv = virtual_temperature(temp, q)
    z1000 = RD * tv[..., 0] / G * np.log(mslp / 1000.0)
    z = heights_from_pressure(p, tv, z1000)
    sp = surface_pressure(p, z, tv, terrain)
    return temp, q, z, sp, terrain


def write_regional(path):
    nx, ny, dx = 84, 66, 32000.0
    x = (np.arange(nx) - (nx - 1) / 2) * dx
    y = (np.arange(ny) - (ny - 1) / 2) * dx
    xx, yy = np.meshgrid(x, y)
    lat0, lon0, lat1, lat2 = 41.0, -152.0, 35.0, 47.0
    lat, lon = lcc_inverse(xx, yy, lat0, lon0, lat1, lat2, EARTH_RADIUS)
    hours = [6.0, 12.0, 18.0]

    ds = netCDF4.Dataset(path, "w", format="NETCDF4")
    ds.Conventions = "CF-1.8"
    ds.title = "Vessaline Coast regional forecast (invented demo scenario)"
    ds.institution = "latentlift demo data (synthetic)"
    ds.source = "scripts/make_sample_grids.py: analytic air masses, hydrostatic heights"
    ds.comment = ("Imaginary coastline: warm moist sector over the Umbrel Sea and the Vessaline Coast, "
                  "a cold front moving east, polar air behind it, the Korrath Plateau inland "
                  "(levels below its ground are extrapolated; surface_air_pressure marks them).")
    ds.createDimension("time", None)
    ds.createDimension("isobaric", len(REGIONAL_LEVELS_HPA))
    ds.createDimension("y", ny)
    ds.createDimension("x", nx)

    v = ds.createVariable("time", "f8", ("time",))
    v.standard_name, v.long_name, v.units, v.calendar, v.axis = "time", "valid time", \
        "hours since 2031-07-14 00:00:00", "standard", "T"
    v[:] = hours
    v = ds.createVariable("isobaric", "f4", ("isobaric",))
    v.standard_name, v.long_name, v.units, v.positive, v.axis = "air_pressure", "pressure level", "hPa", "down", "Z"
    v[:] = REGIONAL_LEVELS_HPA
    v = ds.createVariable("y", "f8", ("y",))
    v.standard_name, v.long_name, v.units, v.axis = "projection_y_coordinate", "y coordinate of projection", "m", "Y"
    v[:] = y
    v = ds.createVariable("x", "f8", ("x",))
    v.standard_name, v.long_name, v.units, v.axis = "projection_x_coordinate", "x coordinate of projection", "m", "X"
    v[:] = x
    v = ds.createVariable("lat", "f4", ("y", "x"), zlib=True, complevel=5)
    v.standard_name, v.long_name, v.units = "latitude", "latitude", "degrees_north"
    v[:] = lat
    v = ds.createVariable("lon", "f4", ("y", "x"), zlib=True, complevel=5)
    v.standard_name, v.long_name, v.units = "longitude", "longitude", "degrees_east"
    v[:] = lon
    crs = ds.createVariable("lambert_conformal", "i4")
    crs.grid_mapping_name = "lambert_conformal_conic"
    crs.standard_parallel = np.array([lat1, lat2])
    crs.longitude_of_central_meridian = lon0
    crs.latitude_of_projection_origin = lat0
    crs.false_easting = 0.0
    crs.false_northing = 0.0
    crs.earth_radius = EARTH_RADIUS

    def field(name, dims, standard_name, long_name, units, digits):
        var = ds.createVariable(name, "f4", dims, zlib=True, complevel=6, shuffle=True,
                                significant_digits=digits,
                                chunksizes=tuple(1 if d in ("time", "isobaric") else len(ds.dimensions[d]) for d in dims))
        var.standard_name, var.long_name, var.units = standard_name, long_name, units
        var.grid_mapping = "lambert_conformal"
        var.coordinates = "lat lon"
        return var

    dims3 = ("time", "isobaric", "y", "x")
    vt = field("temp", dims3, "air_temperature", "temperature", "K", 5)
    vq = field("spfh", dims3, "specific_humidity", "specific humidity", "kg kg-1", 4)
    vz = field("hgt", dims3, "geopotential_height", "geopotential height", "m", 5)
    vs = field("psfc", ("time", "y", "x"), "surface_air_pressure", "surface pressure", "Pa", 6)
    vh = ds.createVariable("orography", "f4", ("y", "x"), zlib=True, complevel=6, significant_digits=4)
    vh.standard_name, vh.long_name, vh.units = "surface_altitude", "model terrain height", "m"
    vh.grid_mapping, vh.coordinates = "lambert_conformal", "lat lon"

    xkm, ykm = xx / 1000.0, yy / 1000.0
    for it, hour in enumerate(hours):
        temp, q, z, sp, terrain = regional_state(xkm, ykm, hour)
        vt[it] = np.moveaxis(temp, -1, 0)
        vq[it] = np.moveaxis(q, -1, 0)
        vz[it] = np.moveaxis(z, -1, 0)
        vs[it] = sp * 100.0
    vh[:] = terrain
    ds.close()


# ----------------------------------------------------------------------------- global grid
GLOBAL_LEVELS_PA = np.array([1000, 2000, 3000, 5000, 7000, 10000, 15000, 20000, 25000, 30000, 40000,
                             50000, 60000, 70000, 85000, 92500, 100000], dtype=float)


def global_state(lat2d, lon2d, hour):
    """Idealised northern-winter planet with two invented continents, Aurel and Norrowen. Returns T (K), RH (fraction), z (m), sp (hPa), terrain (m), levels descending."""
    p = GLOBAL_LEVELS_PA[::-1] / 100.0             # hPa, descending for the integration
    P = p[None, None, :]
    phi = np.radians(lat2d)[..., None]
    lam = np.radians(lon2d)[..., None]

    def blob(lat_c, lon_c, r_deg):
        d = np.degrees(np.arccos(np.clip(np.sin(np.radians(lat_c)) * np.sin(np.radians(lat2d))
                                         + np.cos(np.radians(lat_c)) * np.cos(np.radians(lat2d))
                                         * np.cos(np.radians(lon2d - lon_c)), -1, 1)))
        return d / r_deg

    # continent Aurel (tropical/southern, with the Sennal Highlands), continent Norrowen (northern mid-latitudes)
    aurel = 1.0 / (1.0 + blob(-5.0, 40.0, 28.0) ** 6)
    norrowen = 1.0 / (1.0 + blob(50.0, 200.0, 30.0) ** 6)
    land = np.maximum(aurel, norrowen)
    terrain = land * 350.0 + 4200.0 / (1.0 + blob(-12.0, 48.0, 9.0) ** 6) + 2800.0 / (1.0 + blob(55.0, 215.0, 8.0) ** 6)

    # northern winter: cold north pole, mild south; warmest near 5 S
    t_sfc = 301.0 - 48.0 * np.sin(phi - np.radians(-5.0)) ** 2 - 14.0 * np.clip(np.sin(phi), 0, 1) ** 3
    local_hour = (hour + lon2d[..., None] / 15.0) % 24.0
    t_sfc = t_sfc + land[..., None] * 3.0 * np.cos(2 * np.pi * (local_hour - 14.0) / 24.0) * np.cos(phi)
    lapse = 6.4 - 2.2 * np.sin(phi) ** 2
    t_trop = 196.0 + 22.0 * np.sin(phi) ** 2
    temp = lapse_profile(t_sfc, lapse, t_trop, P)
    # winter polar surface inversion (north); dry trade inversion over the subtropical oceans
    temp = temp + np.clip(np.sin(phi), 0, 1) ** 4 * surface_inversion(P, 1000.0, 12.0, 0.1)
    subtropics = np.exp(-((np.abs(np.degrees(phi)) - 22.0) / 7.0) ** 2) * (1.0 - land[..., None])
    temp_moist = temp
    temp = temp + subtropics * capping_layer(P, 900.0, 3.0)

    tropics = np.exp(-((np.degrees(phi) + 5.0) / 16.0) ** 2)
    rh_moist = np.interp(P, [10, 100, 300, 500, 700, 850, 1000], [0.02, 0.10, 0.40, 0.50, 0.60, 0.80, 0.85])
    rh_dry = np.interp(P, [10, 100, 300, 500, 700, 850, 1000], [0.02, 0.10, 0.20, 0.25, 0.30, 0.55, 0.70])
    rh = tropics * rh_moist + (1.0 - tropics) * rh_dry
    q = specific_humidity(rh, temp_moist, P)
    tv = virtual_temperature(temp, q)
    mslp = 1011.0 + 9.0 * np.exp(-((np.abs(lat2d) - 32.0) / 12.0) ** 2) - 10.0 * np.exp(-((np.abs(lat2d) - 60.0) / 10.0) ** 2)
    z1000 = RD * tv[..., 0] / G * np.log(mslp / 1000.0)
    z = heights_from_pressure(p, tv, z1000)
    sp = surface_pressure(p, z, tv, terrain)
    return temp, rh, z, sp, terrain


def write_global(path):
    lat = np.arange(-90.0, 90.1, 5.0)
    lon = np.arange(0.0, 360.0, 5.0)
    lon2d, lat2d = np.meshgrid(lon, lat)
    hours = [0.0, 12.0]

    ds = netCDF4.Dataset(path, "w", format="NETCDF4")
    ds.Conventions = "CF-1.8"
    ds.title = "Aurel global coarse analysis (invented demo scenario)"
    ds.institution = "latentlift demo data (synthetic)"
    ds.source = "scripts/make_sample_grids.py: analytic zonal climate with two invented continents"
    ds.comment = ("Northern-winter planet: moist tropics over the continent Aurel and the warm seas, "
                  "trade-wind inversions in the subtropics, polar winter air over the north; the Sennal "
                  "Highlands rise to about 4 km. Pressure in Pa, ascending; levels below ground are _FillValue.")
    ds.createDimension("time", None)
    ds.createDimension("plev", len(GLOBAL_LEVELS_PA))
    ds.createDimension("lat", len(lat))
    ds.createDimension("lon", len(lon))
    v = ds.createVariable("time", "f8", ("time",))
    v.standard_name, v.units, v.calendar, v.axis = "time", "days since 2031-01-01 00:00:00", "proleptic_gregorian", "T"
    v[:] = [14.0 + h / 24.0 for h in hours]
    v = ds.createVariable("plev", "f8", ("plev",))
    v.standard_name, v.long_name, v.units, v.positive, v.axis = "air_pressure", "pressure", "Pa", "down", "Z"
    v[:] = GLOBAL_LEVELS_PA
    v = ds.createVariable("lat", "f8", ("lat",))
    v.standard_name, v.long_name, v.units, v.axis = "latitude", "latitude", "degrees_north", "Y"
    v[:] = lat
    v = ds.createVariable("lon", "f8", ("lon",))
    v.standard_name, v.long_name, v.units, v.axis = "longitude", "longitude", "degrees_east", "X"
    v[:] = lon

    def field(name, dims, standard_name, long_name, units, digits):
        var = ds.createVariable(name, "f4", dims, zlib=True, complevel=6, shuffle=True, fill_value=FILL,
                                significant_digits=digits)
        var.standard_name, var.long_name, var.units = standard_name, long_name, units
        var.missing_value = FILL
        return var

    dims3 = ("time", "plev", "lat", "lon")
    vt = field("ta", dims3, "air_temperature", "air temperature", "K", 5)
    vr = field("hur", dims3, "relative_humidity", "relative humidity", "%", 4)
    vz = field("z", dims3, "geopotential", "geopotential", "m2 s-2", 6)
    vs = field("ps", ("time", "lat", "lon"), "surface_air_pressure", "surface pressure", "Pa", 6)
    for it, hour in enumerate(hours):
        temp, rh, z, sp, _ = global_state(lat2d, lon2d, hour)
        below = (GLOBAL_LEVELS_PA[::-1][None, None, :] / 100.0) > sp[..., None]
        order = slice(None, None, -1)   # back to ascending pressure
        vt[it] = np.moveaxis(np.where(below, FILL, temp), -1, 0)[order]
        vr[it] = np.moveaxis(np.where(below, FILL, rh * 100.0), -1, 0)[order]
        vz[it] = np.moveaxis(np.where(below, FILL, z * G), -1, 0)[order]
        vs[it] = sp * 100.0
    ds.close()


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("output_dir", nargs="?", default=os.path.join(here, "..", "sample_grids"),
                        help="folder to write the two sample grids to (default: sample_grids/)")
    out = parser.parse_args().output_dir
    os.makedirs(out, exist_ok=True)
    for name, writer in (("vessaline_coast_lcc.nc", write_regional), ("aurel_global_5deg.nc", write_global)):
        path = os.path.join(out, name)
        tmp = path + ".tmp"
        writer(tmp)
        os.replace(tmp, path)
        print(f"wrote {os.path.normpath(path)} ({os.path.getsize(path) / 1e6:.2f} MB)")


if __name__ == "__main__":
    main()
