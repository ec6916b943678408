#!/usr/bin/python3
"""Write small NetCDF inputs in every input shape latentlift accepts, and beside each one
the same columns in the kernel's own terms (expected_<shape>.nc), for the end-to-end tests.

Usage: /usr/bin/python3 make_shapes.py OUTPUT_DIR [SHAPE... | errors | split_time]

Every shape encodes one underlying state (a few columns: warm moist, capped, cold stable,
a plateau with levels below ground) in a different convention. expected_<shape>.nc holds, per
column, exactly what a correct reader must hand to the column kernel: the stored values
unpacked in double precision and converted to SI (K, Pa, kg/kg or fraction, m), levels in
file order, NaN where missing, with index_<dim> variables that say where the column sits
along each of the shape's non-vertical dimensions. The error_* files are bad inputs.
"""
import os
import sys

import numpy as np
import netCDF4

RD, RV, G = 287.04, 461.5, 9.80665
EPS = RD / RV
LEVELS_HPA = np.array([1000, 950, 900, 850, 800, 750, 700, 650, 600, 500, 400, 300, 250, 200, 150, 100.0])
FILL_F = np.float32(-9999.0)
FILL_S = np.int16(-32767)


def es_hpa(temp_k):
    """Bolton (1980, eq. 10), hPa."""
    t = temp_k - 273.15
    return 6.112 * np.exp(17.67 * t / (t + 243.5))


def base_state(ny, nx, nt, seed=0):
    """T (K), q (kg/kg), z (m) with shape (nt, nlev, ny, nx), levels descending; sp (Pa) (nt, ny, nx)."""
    rng = np.random.default_rng(seed)
    p = LEVELS_HPA[None, :, None, None]
    it = np.arange(nt)[:, None, None, None]
    iy = np.arange(ny)[None, None, :, None]
    ix = np.arange(nx)[None, None, None, :]
    fx = ix / max(nx - 1, 1)
    fy = iy / max(ny - 1, 1)
    t0 = 274.0 + 26.0 * fx + 1.5 * it + 0.3 * rng.standard_normal((nt, 1, ny, nx))
    lapse = 5.0 + 1.8 * fx                                  # K/km: stable cold air to conditionally unstable
    temp = t0 * (p / 1000.0) ** (RD * lapse * 1e-3 / G)
    temp = np.maximum(temp, 213.0 + 0 * temp)
    cap = 3.0 * ((ix + iy) % 3 == 0) * np.exp(-((np.log(p / 850.0)) / 0.05) ** 2)
    temp = temp + cap
    rh = np.clip((0.45 + 0.45 * fy) * np.interp(p, [100, 300, 600, 850, 1000], [0.1, 0.35, 0.6, 0.95, 1.0]), 0.02, 0.97)
    e = rh * es_hpa(temp)
    q = EPS * e / (p - (1 - EPS) * e)
    tv = temp * (1 + (1 / EPS - 1) * q)
    z = np.empty_like(temp)
    z[:, 0] = 90.0 + 20.0 * rng.standard_normal((nt, ny, nx))
    for k in range(1, len(LEVELS_HPA)):
        z[:, k] = z[:, k - 1] + RD * 0.5 * (tv[:, k - 1] + tv[:, k]) / G * np.log(LEVELS_HPA[k - 1] / LEVELS_HPA[k])
    # terrain: two plateau columns (about 820 and 730 hPa), lowlands elsewhere
    terrain = np.zeros((ny, nx))
    terrain[ny // 2, nx // 2] = 1700.0
    terrain[-1, -1] = 2600.0
    sp = np.empty((nt, ny, nx))
    for t in range(nt):
        for j in range(ny):
            for i in range(nx):
                zc = z[t, :, j, i]
                h = terrain[j, i]
                if h <= zc[0]:
                    sp[t, j, i] = 1000.0 * np.exp(G * (zc[0] - h) / (RD * tv[t, 0, j, i]))
                else:
                    sp[t, j, i] = np.exp(np.interp(h, zc, np.log(LEVELS_HPA)))
    return temp, q, z, sp * 100.0


class Shape:
    def __init__(self, name, **kw):
        self.name = name
        self.grid = kw.get("grid", "latlon")          # latlon | lcc | cell
        self.time = kw.get("time", True)
        self.order = kw.get("order", None)            # dimension order of 3-D fields (names)
        self.pressure_units = kw.get("pressure_units", "hPa")
        self.ascending = kw.get("ascending", False)
        self.temp_units = kw.get("temp_units", "K")
        self.humidity = kw.get("humidity", "specific_humidity")
        self.humidity_units = kw.get("humidity_units", "kg kg-1")
        self.height = kw.get("height", "geopotential_height")
        self.surface = kw.get("surface", "sp")          # sp: surface pressure marks below ground; fill: _FillValue
        self.packed = kw.get("packed", False)
        self.level_name = kw.get("level_name", "level")
        self.level_attrs = kw.get("level_attrs", True)
        self.ny, self.nx, self.nt = kw.get("size", (4, 5, 2))


SHAPES = [
    Shape("plain_latlon"),
    Shape("packed_int16", packed=True),
    Shape("pa_ascending", pressure_units="Pa", ascending=True, height="geopotential"),
    Shape("degc_relative_humidity", temp_units="degC", humidity="relative_humidity", humidity_units="%"),
    Shape("dew_point", humidity="dew_point_temperature", humidity_units="K"),
    Shape("mixing_ratio_gkg", humidity="humidity_mixing_ratio", humidity_units="g kg-1"),
    Shape("unstructured_cells", grid="cell"),
    Shape("no_time", time=False),
    Shape("below_ground_fill", surface="fill"),
    Shape("dimension_order", order=("lon", "level", "time", "lat")),
    Shape("millibars_level", level_name="lev", pressure_units="millibars", level_attrs=False),
    Shape("projected_lcc", grid="lcc"),
    Shape("threads", size=(30, 40, 2)),
]


def horizontal_dims(shape):
    return {"latlon": ["lat", "lon"], "lcc": ["y", "x"], "cell": ["cell"]}[shape.grid]


def to_file_layout(field4, shape):
    """(nt, nlev, ny, nx) descending levels -> array ordered like the file's dims, and the dim names."""
    f = field4
    if shape.ascending:
        f = f[:, ::-1]
    names = ["time", "level"]
    if shape.grid == "cell":
        f = f.reshape(f.shape[0], f.shape[1], -1)
        names += ["cell"]
    else:
        names += horizontal_dims(shape)
    if not shape.time:
        f = f[0]
        names = names[1:]
    if shape.order:
        perm = [names.index(n) for n in shape.order]
        f = np.transpose(f, perm)
        names = list(shape.order)
    return f, names


def write_shape(shape, out_dir):
    temp, q, z, sp = base_state(shape.ny, shape.nx, shape.nt)
    p_pa = LEVELS_HPA * 100.0
    below = (p_pa[None, :, None, None] > sp[:, None, :, :])
    e = q * (LEVELS_HPA[None, :, None, None]) / (EPS + (1 - EPS) * q)

    # quantities in the file's units (float64 before storage)
    if shape.temp_units == "degC":
        t_file = temp - 273.15
    else:
        t_file = temp
    if shape.humidity == "specific_humidity":
        h_file = q
    elif shape.humidity == "relative_humidity":
        h_file = 100.0 * e / es_hpa(temp)
    elif shape.humidity == "dew_point_temperature":
        x = np.log(e / 6.112)
        h_file = 273.15 + 243.5 * x / (17.67 - x)
    elif shape.humidity == "humidity_mixing_ratio":
        h_file = 1000.0 * q / (1.0 - q)
    z_file = z * G if shape.height == "geopotential" else z

    ds = netCDF4.Dataset(os.path.join(out_dir, shape.name + ".nc"), "w", format="NETCDF4")
    ds.Conventions = "CF-1.8"
    ds.title = f"latentlift test input: {shape.name}"
    nlev = len(LEVELS_HPA)
    if shape.time:
        ds.createDimension("time", shape.nt)
        v = ds.createVariable("time", "f8", ("time",))
        v.standard_name, v.units, v.calendar = "time", "hours since 2030-05-01 00:00:00", "standard"
        v[:] = 6.0 * np.arange(shape.nt)
    ds.createDimension(shape.level_name, nlev)
    lev = ds.createVariable(shape.level_name, "f8", (shape.level_name,))
    levels = LEVELS_HPA[::-1] if shape.ascending else LEVELS_HPA
    lev[:] = levels * (100.0 if shape.pressure_units == "Pa" else 1.0)
    lev.units = shape.pressure_units
    if shape.level_attrs:
        lev.standard_name, lev.positive, lev.axis = "air_pressure", "down", "Z"
    else:
        lev.long_name = "pressure level"
    coords = ""
    grid_mapping = None
    ny, nx = shape.ny, shape.nx
    lats = np.linspace(10.0, 40.0, ny)
    lons = np.linspace(0.0, 20.0, nx)
    if shape.grid == "latlon":
        ds.createDimension("lat", ny)
        ds.createDimension("lon", nx)
        v = ds.createVariable("lat", "f8", ("lat",))
        v.standard_name, v.units, v.axis = "latitude", "degrees_north", "Y"
        v[:] = lats
        v = ds.createVariable("lon", "f8", ("lon",))
        v.standard_name, v.units, v.axis = "longitude", "degrees_east", "X"
        v[:] = lons
    elif shape.grid == "cell":
        ds.createDimension("cell", ny * nx)
        lon2, lat2 = np.meshgrid(lons, lats)
        v = ds.createVariable("lat", "f8", ("cell",))
        v.standard_name, v.units = "latitude", "degrees_north"
        v[:] = lat2.ravel()
        v = ds.createVariable("lon", "f8", ("cell",))
        v.standard_name, v.units = "longitude", "degrees_east"
        v[:] = lon2.ravel()
        coords = "lat lon"
    else:  # lcc
        ds.createDimension("y", ny)
        ds.createDimension("x", nx)
        dx = 40000.0
        x = (np.arange(nx) - (nx - 1) / 2) * dx
        y = (np.arange(ny) - (ny - 1) / 2) * dx
        v = ds.createVariable("x", "f8", ("x",))
        v.standard_name, v.units, v.axis = "projection_x_coordinate", "m", "X"
        v[:] = x
        v = ds.createVariable("y", "f8", ("y",))
        v.standard_name, v.units, v.axis = "projection_y_coordinate", "m", "Y"
        v[:] = y
        crs = ds.createVariable("crs", "i4")
        crs.grid_mapping_name = "lambert_conformal_conic"
        crs.standard_parallel = np.array([30.0, 50.0])
        crs.longitude_of_central_meridian = 10.0
        crs.latitude_of_projection_origin = 40.0
        crs.false_easting = 0.0
        crs.false_northing = 0.0
        crs.earth_radius = 6371229.0
        grid_mapping = "crs"
        # 2-D lat/lon from the spherical Lambert conformal conic inverse (Snyder 1987, USGS PP 1395)
        phi0, phi1, phi2 = np.radians([40.0, 30.0, 50.0])
        n = np.log(np.cos(phi1) / np.cos(phi2)) / np.log(np.tan(np.pi / 4 + phi2 / 2) / np.tan(np.pi / 4 + phi1 / 2))
        F = np.cos(phi1) * np.tan(np.pi / 4 + phi1 / 2) ** n / n
        R = 6371229.0
        rho0 = R * F / np.tan(np.pi / 4 + phi0 / 2) ** n
        xx, yy = np.meshgrid(x, y)
        rho = np.sqrt(xx ** 2 + (rho0 - yy) ** 2)
        theta = np.arctan2(xx, rho0 - yy)
        v = ds.createVariable("lat", "f8", ("y", "x"))
        v.standard_name, v.units = "latitude", "degrees_north"
        v[:] = np.degrees(2 * np.arctan((R * F / rho) ** (1 / n)) - np.pi / 2)
        v = ds.createVariable("lon", "f8", ("y", "x"))
        v.standard_name, v.units = "longitude", "degrees_east"
        v[:] = 10.0 + np.degrees(theta / n)
        coords = "lat lon"

    def write_field(name, data4, standard_name, units, pack=None):
        data = data4.copy()
        if shape.surface == "fill":
            data[below] = np.nan
        arr, dims = to_file_layout(data, shape)
        file_dims = [shape.level_name if d == "level" else d for d in dims]
        if pack:
            scale, offset = pack
            raw = np.round((arr - offset) / scale)
            raw = np.where(np.isnan(arr), FILL_S, raw).astype(np.int16)
            var = ds.createVariable(name, "i2", file_dims, fill_value=FILL_S, zlib=True)
            var.set_auto_maskandscale(False)
            var.scale_factor = np.float64(scale)
            var.add_offset = np.float64(offset)
            var[:] = raw
            stored = np.where(raw == FILL_S, np.nan, raw * np.float64(scale) + np.float64(offset))
        else:
            raw = np.where(np.isnan(arr), FILL_F, arr).astype(np.float32)
            var = ds.createVariable(name, "f4", file_dims, fill_value=FILL_F, zlib=True)
            var.set_auto_maskandscale(False)
            var[:] = raw
            stored = np.where(raw == FILL_F, np.nan, raw.astype(np.float64))
        var.standard_name, var.units = standard_name, units
        if coords:
            var.coordinates = coords
        if grid_mapping:
            var.grid_mapping = grid_mapping
        return stored, dims

    packs = {"t": (0.005, 250.0), "h": (5e-7, 0.016), "z": (0.5, 8000.0)} if shape.packed else {"t": None, "h": None, "z": None}
    t_stored, dims = write_field("t", t_file, "air_temperature", shape.temp_units, packs["t"])
    h_stored, _ = write_field("hum", h_file, shape.humidity, shape.humidity_units, packs["h"])
    z_stored, _ = write_field("gh", z_file, shape.height, "m2 s-2" if shape.height == "geopotential" else "m", packs["z"])
    if shape.surface == "sp":
        hdims = [d for d in dims if d != "level"]
        sp_arr = sp if shape.time else sp[0]
        # reorder sp like the 3-D fields without the level dimension
        base_names = (["time"] if shape.time else []) + (["cell"] if shape.grid == "cell" else horizontal_dims(shape))
        if shape.grid == "cell":
            sp_arr = sp_arr.reshape(sp_arr.shape[:-2] + (-1,))
        sp_arr = np.transpose(sp_arr, [base_names.index(n) for n in hdims])
        var = ds.createVariable("sp", "f4", hdims, zlib=True)
        var.standard_name, var.units = "surface_air_pressure", "Pa"
        if coords:
            var.coordinates = coords
        if grid_mapping:
            var.grid_mapping = grid_mapping
        raw_sp = sp_arr.astype(np.float32)
        var[:] = raw_sp
        sp_stored = raw_sp.astype(np.float64)
    ds.close()

    # ---- the expected kernel input, column by column
    if shape.order:
        def canon(a, names):   # back to (time?, level?, horizontal...) in base order
            target = [n for n in (["time"] if shape.time else []) + (["level"] if "level" in names else [])
                      + (["cell"] if shape.grid == "cell" else horizontal_dims(shape))]
            return np.transpose(a, [names.index(n) for n in target])
    else:
        def canon(a, names):
            return a
    t_c = canon(t_stored, dims)
    h_c = canon(h_stored, dims)
    z_c = canon(z_stored, dims)
    if not shape.time:
        t_c, h_c, z_c = t_c[None], h_c[None], z_c[None]
    nt = t_c.shape[0]
    t_c = t_c.reshape(nt, nlev, -1)
    h_c = h_c.reshape(nt, nlev, -1)
    z_c = z_c.reshape(nt, nlev, -1)
    ncol_h = t_c.shape[2]
    if shape.surface == "sp":
        sp_c = canon(sp_stored, [d for d in dims if d != "level"])
        if not shape.time:
            sp_c = sp_c[None]
        sp_c = sp_c.reshape(nt, -1)
    else:
        sp_c = np.full((nt, ncol_h), np.nan)

    conv_t = (lambda a: a + 273.15) if shape.temp_units == "degC" else (lambda a: a)
    conv_h = {"specific_humidity": lambda a: a, "relative_humidity": lambda a: a / 100.0,
              "dew_point_temperature": lambda a: a, "humidity_mixing_ratio": lambda a: a * 1e-3}[shape.humidity]
    conv_z = (lambda a: a / G) if shape.height == "geopotential" else (lambda a: a)
    p_file = (LEVELS_HPA[::-1] if shape.ascending else LEVELS_HPA) * 100.0

    ncol = nt * ncol_h
    ex = netCDF4.Dataset(os.path.join(out_dir, "expected_" + shape.name + ".nc"), "w", format="NETCDF4")
    ex.humidity_kind = {"specific_humidity": "specific_humidity", "relative_humidity": "relative_humidity",
                        "dew_point_temperature": "dew_point", "humidity_mixing_ratio": "mixing_ratio"}[shape.humidity]
    ex.createDimension("column", ncol)
    ex.createDimension("level", nlev)
    ex.createVariable("pressure_pa", "f8", ("level",))[:] = p_file
    colwise = lambda a: np.transpose(a, (0, 2, 1)).reshape(ncol, nlev)
    ex.createVariable("temp_k", "f8", ("column", "level"))[:] = conv_t(colwise(t_c))
    ex.createVariable("humidity", "f8", ("column", "level"))[:] = conv_h(colwise(h_c))
    ex.createVariable("height_m", "f8", ("column", "level"))[:] = conv_z(colwise(z_c))
    ex.createVariable("surface_pressure_pa", "f8", ("column",))[:] = sp_c.reshape(ncol)
    tt, hh = np.meshgrid(np.arange(nt), np.arange(ncol_h), indexing="ij")
    tt, hh = tt.ravel(), hh.ravel()
    if shape.time:
        ex.createVariable("index_time", "i4", ("column",))[:] = tt
    if shape.grid == "cell":
        ex.createVariable("index_cell", "i4", ("column",))[:] = hh
    else:
        a, b = horizontal_dims(shape)
        ex.createVariable("index_" + a, "i4", ("column",))[:] = hh // shape.nx
        ex.createVariable("index_" + b, "i4", ("column",))[:] = hh % shape.nx
    ex.close()


def write_errors(out_dir):
    """Bad inputs, each with exactly one problem."""
    base = os.path.join(out_dir, "plain_latlon.nc")

    def copy_with(name, edit):
        src = netCDF4.Dataset(base)
        dst = netCDF4.Dataset(os.path.join(out_dir, name), "w", format="NETCDF4")
        for k in src.ncattrs():
            dst.setncattr(k, src.getncattr(k))
        for dname, dim in src.dimensions.items():
            dst.createDimension(dname, len(dim))
        for vname, var in src.variables.items():
            spec = edit(vname, var)
            if spec is None:
                continue
            data, attrs, vname_out, dims = spec
            fill = attrs.pop("_FillValue", None)
            out = dst.createVariable(vname_out, var.dtype, dims, fill_value=fill)
            out.set_auto_maskandscale(False)
            for k, val in attrs.items():
                out.setncattr(k, val)
            out[:] = data
        src.close()
        dst.close()

    def attrs_of(var):
        return {k: var.getncattr(k) for k in var.ncattrs()}

    def raw(var):
        var.set_auto_maskandscale(False)
        return var[:]

    def keep(vname, var):
        return raw(var), attrs_of(var), vname, var.dimensions

    # no temperature at all
    copy_with("error_missing_temperature.nc", lambda n, v: None if n == "t" else keep(n, v))

    # temperature in metres per second
    def wrong_units(n, v):
        d, a, name, dims = keep(n, v)
        if n == "t":
            a["units"] = "m s-1"
        return d, a, name, dims
    copy_with("error_wrong_units.nc", wrong_units)

    # the vertical coordinate is height in metres: no pressure dimension anywhere
    def no_pressure(n, v):
        d, a, name, dims = keep(n, v)
        if n == "level":
            d = np.linspace(100.0, 16000.0, len(d))
            a = {"standard_name": "height", "units": "m", "positive": "up", "axis": "Z"}
        return d, a, name, dims
    copy_with("error_no_pressure_dimension.nc", no_pressure)

    # every temperature missing
    def all_missing(n, v):
        d, a, name, dims = keep(n, v)
        if n == "t":
            d = np.full(d.shape, FILL_F, dtype=np.float32)
        return d, a, name, dims
    copy_with("error_all_missing.nc", all_missing)

    # truncated NetCDF-4 file (first half of a good file)
    with open(os.path.join(out_dir, "threads.nc"), "rb") as f:
        data = f.read()
    with open(os.path.join(out_dir, "error_truncated.nc"), "wb") as f:
        f.write(data[: len(data) // 2])
    # not NetCDF at all
    with open(os.path.join(out_dir, "error_not_netcdf.nc"), "w") as f:
        f.write("time,level,t\n0,1000,288.15\n")

    # fields split across two files on different grids: pressure levels 4 x 5, surface 4 x 6
    def no_sp(n, v):
        return None if n == "sp" else keep(n, v)
    copy_with("error_grid_levels.nc", no_sp)
    ds = netCDF4.Dataset(os.path.join(out_dir, "error_grid_surface.nc"), "w", format="NETCDF4")
    ds.Conventions = "CF-1.8"
    ds.createDimension("time", 2)
    ds.createDimension("lat", 4)
    ds.createDimension("lon", 6)
    v = ds.createVariable("time", "f8", ("time",))
    v.standard_name, v.units = "time", "hours since 2030-05-01 00:00:00"
    v[:] = [0.0, 6.0]
    v = ds.createVariable("lat", "f8", ("lat",))
    v.standard_name, v.units = "latitude", "degrees_north"
    v[:] = np.linspace(10.0, 40.0, 4)
    v = ds.createVariable("lon", "f8", ("lon",))
    v.standard_name, v.units = "longitude", "degrees_east"
    v[:] = np.linspace(0.0, 25.0, 6)
    v = ds.createVariable("sp", "f4", ("time", "lat", "lon"))
    v.standard_name, v.units = "surface_air_pressure", "Pa"
    v[:] = 101000.0
    ds.close()


def write_time_split(out_dir):
    """plain_latlon.nc cut into one file per time step: split_t0.nc, split_t1.nc."""
    src = netCDF4.Dataset(os.path.join(out_dir, "plain_latlon.nc"))
    for t in range(len(src.dimensions["time"])):
        dst = netCDF4.Dataset(os.path.join(out_dir, f"split_t{t}.nc"), "w", format="NETCDF4")
        for k in src.ncattrs():
            dst.setncattr(k, src.getncattr(k))
        for name, dim in src.dimensions.items():
            dst.createDimension(name, 1 if name == "time" else len(dim))
        for name, var in src.variables.items():
            var.set_auto_maskandscale(False)
            attrs = {k: var.getncattr(k) for k in var.ncattrs()}
            out = dst.createVariable(name, var.dtype, var.dimensions, fill_value=attrs.pop("_FillValue", None))
            out.set_auto_maskandscale(False)
            out.setncatts(attrs)
            if "time" in var.dimensions:
                index = tuple(slice(t, t + 1) if d == "time" else slice(None) for d in var.dimensions)
                out[:] = var[index]
            else:
                out[:] = var[:]
        dst.close()
    src.close()


def main():
    out_dir = sys.argv[1]
    wanted = set(sys.argv[2:])            # shape names and/or "errors"; nothing: everything
    os.makedirs(out_dir, exist_ok=True)
    for shape in SHAPES:
        if not wanted or shape.name in wanted or ("errors" in wanted and shape.name in ("plain_latlon", "threads")):
            write_shape(shape, out_dir)
    if not wanted or "errors" in wanted:
        write_errors(out_dir)
    if not wanted or "split_time" in wanted:
        if wanted:
            write_shape(SHAPES[0], out_dir)
        write_time_split(out_dir)


if __name__ == "__main__":
    main()
