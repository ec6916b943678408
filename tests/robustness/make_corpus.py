#!/usr/bin/python3
"""Make a seeded corpus of damaged inputs from the sample grids, for tests/robustness/test_corpus.py.

Usage: /usr/bin/python3 tests/robustness/make_corpus.py OUT_DIR [--seed N] [--analysis A.nc ...]

Model inputs are cut from sample_grids/ (a few columns, so that each run takes a fraction of a
second) and damaged in file bytes (flips, truncations, zeroed blocks), in metadata (units,
packing, fill values, coordinates) and in data (NaN, inf, zero, negative, absurd levels,
zero-length and huge dimensions, mismatched second files). With --analysis, outputs of
`latentlift analyze` are damaged too (for reproject, quicklook and climatology).

Writes OUT_DIR/manifest.json: one entry per case with
  kind      the damage (cases of one kind are tested together)
  inputs    the input files (the first is the one damaged, unless said otherwise)
  role      "model" (analyze, column, climatology) or "analysis" (reproject, quicklook, climatology)
  expect    [0, 2] when either a result or a refusal is right, [2] when the input must be refused
  lat, lon  a point inside the grid, for `latentlift column`
The same seed gives the same corpus.
"""
import argparse
import json
import os
import random
import shutil

import numpy as np
import netCDF4

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLE_GRIDS = os.path.join(HERE, "..", "..", "sample_grids")


# ----------------------------------------------------------------------------- in-memory datasets
class Var:
    def __init__(self, dims, data, attrs, dtype=None):
        self.dims = list(dims)
        self.data = data
        self.attrs = dict(attrs)
        self.dtype = dtype if dtype is not None else data.dtype


class Dataset:
    """A NetCDF file as plain Python objects, mutated freely and then written."""

    def __init__(self):
        self.dims = {}        # name -> length (None: unlimited)
        self.vars = {}        # name -> Var (in order)
        self.attrs = {}
        self.format = "NETCDF4"

    @staticmethod
    def read(path):
        ds = Dataset()
        with netCDF4.Dataset(path) as nc:
            nc.set_auto_maskandscale(False)
            for name, dim in nc.dimensions.items():
                ds.dims[name] = None if dim.isunlimited() else len(dim)
            for name, var in nc.variables.items():
                attrs = {a: var.getncattr(a) for a in var.ncattrs()
                         if not a.startswith("_Quantize")}
                ds.vars[name] = Var(var.dimensions, np.array(var[...]), attrs)
            ds.attrs = {a: nc.getncattr(a) for a in nc.ncattrs()}
        return ds

    def copy(self):
        out = Dataset()
        out.dims = dict(self.dims)
        out.vars = {k: Var(v.dims, v.data.copy(), v.attrs, v.dtype) for k, v in self.vars.items()}
        out.attrs = dict(self.attrs)
        out.format = self.format
        return out

    def length(self, dim):
        for var in self.vars.values():
            if dim in var.dims:
                return var.data.shape[var.dims.index(dim)]
        return self.dims[dim] or 0

    def subset(self, **slices):
        """Cut dimensions: subset(lat=slice(0, 6)) applies to every variable on lat."""
        out = self.copy()
        for name, var in out.vars.items():
            index = tuple(slices.get(d, slice(None)) for d in var.dims)
            if var.dims:
                var.data = var.data[index]
        for dim, s in slices.items():
            if out.dims[dim] is not None:
                out.dims[dim] = len(range(*s.indices(self.length(dim))))
        return out

    def write(self, path):
        with netCDF4.Dataset(path, "w", format=self.format) as nc:
            nc.set_auto_maskandscale(False)
            for name, length in self.dims.items():
                nc.createDimension(name, length)
            for name, var in self.vars.items():
                fill = var.attrs.get("_FillValue", None)
                kwargs = {}
                if fill is not None and not isinstance(fill, str):
                    kwargs["fill_value"] = np.array(fill).astype(var.dtype)
                elif self.format == "NETCDF4" or fill is not None:
                    kwargs["fill_value"] = False
                if getattr(var, "chunks", None):
                    kwargs["chunksizes"] = var.chunks
                v = nc.createVariable(name, var.dtype, var.dims, **kwargs)
                v.set_auto_maskandscale(False)  # the values are written as they are
                for key, value in var.attrs.items():
                    if key == "_FillValue" and not isinstance(value, str):
                        continue
                    v.setncattr(key, value)
                if var.data.size and not getattr(var, "unwritten", False):
                    v[...] = var.data.astype(var.dtype) if var.dtype != str else var.data
            for key, value in self.attrs.items():
                nc.setncattr(key, value)


# ----------------------------------------------------------------------------- the base inputs
def base_inputs():
    """Small cuts of the two sample grids with the names of their quantities."""
    aurel = Dataset.read(os.path.join(SAMPLE_GRIDS, "aurel_global_5deg.nc")).subset(
        lat=slice(14, 22), lon=slice(20, 30))
    aurel.roles = {"T": "ta", "H": "hur", "Z": "z", "P": "plev", "PS": "ps", "Y": "lat", "X": "lon"}
    lat = aurel.vars["lat"].data
    lon = aurel.vars["lon"].data
    aurel.point = (float(lat[len(lat) // 2]), float(lon[len(lon) // 2]))
    coast = Dataset.read(os.path.join(SAMPLE_GRIDS, "vessaline_coast_lcc.nc")).subset(
        y=slice(28, 36), x=slice(36, 46))
    coast.roles = {"T": "temp", "H": "spfh", "Z": "hgt", "P": "isobaric", "Y": "y", "X": "x"}
    if "ps" in coast.vars:
        coast.roles["PS"] = "ps"
    coast.point = (float(coast.vars["lat"].data[4, 5]), float(coast.vars["lon"].data[4, 5]))
    return {"aurel": aurel, "coast": coast}


# ----------------------------------------------------------------------------- damage to bytes
def flip_bytes(data, rng, count):
    data = bytearray(data)
    for _ in range(count):
        at = rng.randrange(len(data))
        data[at] ^= 1 << rng.randrange(8)
    return bytes(data)


def zero_block(data, rng):
    data = bytearray(data)
    size = rng.choice([16, 64, 512, 4096])
    at = rng.randrange(max(1, len(data) - size))
    data[at:at + size] = bytes(min(size, len(data) - at))
    return bytes(data)


def truncate(data, rng):
    return data[:rng.randrange(1, len(data))]


# ----------------------------------------------------------------------------- the corpus
class Corpus:
    def __init__(self, out_dir, seed):
        self.out = out_dir
        self.rng = random.Random(seed)
        self.np_rng = np.random.default_rng(seed)
        self.cases = []
        os.makedirs(out_dir, exist_ok=True)

    def path(self, kind, suffix=".nc"):
        n = sum(1 for c in self.cases if c["kind"] == kind)
        return os.path.join(self.out, f"{kind}-{n:03d}{suffix}")

    def add(self, kind, inputs, role, expect, point=None):
        case = {"kind": kind, "inputs": inputs, "role": role, "expect": expect}
        if point:
            case["lat"], case["lon"] = point
        self.cases.append(case)

    def add_dataset(self, kind, ds, role, expect, point=None, fmt=None):
        path = self.path(kind)
        if fmt:
            ds.format = fmt
        ds.write(path)
        self.add(kind, [path], role, expect, point or getattr(ds, "point", None))

    def add_bytes(self, kind, data, role, expect, point=None, suffix=".nc"):
        path = self.path(kind, suffix)
        with open(path, "wb") as f:
            f.write(data)
        self.add(kind, [path], role, expect, point)

    def save(self):
        with open(os.path.join(self.out, "manifest.json"), "w") as f:
            json.dump(self.cases, f, indent=1)


def clean_bytes(ds, fmt, scratch):
    ds = ds.copy()
    ds.format = fmt
    ds.write(scratch)
    with open(scratch, "rb") as f:
        return f.read()


def model_cases(corpus, bases):
    rng = corpus.rng
    scratch = os.path.join(corpus.out, "scratch.nc")
    either, refuse = [0, 2], [2]

    for name, base in bases.items():
        point = base.point
        r = base.roles
        # --- clean inputs (the corpus's control group: these must be analysed)
        corpus.add_dataset("clean", base.copy(), "model", [0], point)
        corpus.add_dataset("clean", base.copy(), "model", [0], point, fmt="NETCDF3_64BIT_OFFSET")

        # --- file bytes
        for fmt in ("NETCDF4", "NETCDF3_CLASSIC"):
            data = clean_bytes(base, fmt, scratch)
            for _ in range(25):
                corpus.add_bytes("byte_flip", flip_bytes(data, rng, rng.choice([1, 2, 8, 64])), "model", either, point)
            for _ in range(10):
                corpus.add_bytes("truncated", truncate(data, rng), "model", refuse, point)
            for _ in range(12):
                corpus.add_bytes("zeroed_block", zero_block(data, rng), "model", either, point)

        # --- units mutations (the values stay as they are: the label is wrong)
        def relabel(kind, var, units, expect=refuse):
            ds = base.copy()
            ds.vars[r[var]].attrs["units"] = units
            corpus.add_dataset(kind, ds, "model", expect, point)

        relabel("units_kelvin_as_celsius", "T", "degC")
        relabel("units_temperature_unknown", "T", "furlongs")
        relabel("units_temperature_long", "T", "K" * 5000)
        if base.vars[r["H"]].attrs.get("units") == "%":
            relabel("units_rh_percent_as_fraction", "H", "1")
        else:
            relabel("units_q_as_percent", "H", "%")
        p_units = base.vars[r["P"]].attrs["units"]
        relabel("units_pressure_mislabelled", "P", "bar" if p_units == "hPa" else "hPa")
        relabel("units_pressure_mislabelled", "P", "kPa")
        z_units = base.vars[r["Z"]].attrs["units"]
        relabel("units_height_mislabelled", "Z", "m" if z_units.startswith("m2") else "m2 s-2")

        # --- packing and fill attributes
        for value in (0.0, float("nan"), float("inf"), -1.0, 1e30):
            ds = base.copy()
            ds.vars[r["T"]].attrs["scale_factor"] = np.float32(value)
            corpus.add_dataset("packing_bad_scale", ds, "model", refuse, point)
        for attrs in ({"scale_factor": "abc"}, {"scale_factor": np.array([1.0, 1.0], "f4")},
                      {"add_offset": np.float32(1e6)}, {"add_offset": "abc"}):
            ds = base.copy()
            ds.vars[r["T"]].attrs.update(attrs)
            corpus.add_dataset("packing_bad_attribute", ds, "model", refuse, point)
        for attrs in ({"missing_value": "abc"}, {"valid_range": np.array([300.0, 200.0], "f4")}):
            ds = base.copy()
            ds.vars[r["T"]].attrs.update(attrs)
            corpus.add_dataset("fill_bad_attribute", ds, "model", refuse, point)
        # CF 2.5.1 allows a vector missing_value (NaN in it adds nothing): a valid input
        ds = base.copy()
        t = ds.vars[r["T"]]
        t.attrs["missing_value"] = np.array([-999.0, -888.0, np.nan], "f4")
        t.data = t.data.copy()
        t.data.flat[0], t.data.flat[-1] = -999.0, -888.0
        corpus.add_dataset("fill_missing_value_list", ds, "model", [0], point)
        # packed properly as int16: a valid input
        ds = base.copy()
        t = ds.vars[r["T"]]
        offset, scale = 250.0, 0.01
        valid = np.abs(t.data) < 1e30
        t.data = np.where(valid, np.round((t.data - offset) / scale), -32767).astype("i2")
        t.dtype = np.dtype("i2")
        t.attrs.update(scale_factor=np.float32(scale), add_offset=np.float32(offset), _FillValue=np.int16(-32767))
        t.attrs.pop("missing_value", None)
        corpus.add_dataset("packed_int16", ds, "model", [0], point)
        # int8 temperature (cannot hold kelvin)
        ds = base.copy()
        t = ds.vars[r["T"]]
        t.data = np.clip(t.data, -128, 127).astype("i1")
        t.dtype = np.dtype("i1")
        t.attrs.pop("_FillValue", None)
        t.attrs.pop("missing_value", None)
        corpus.add_dataset("int8_temperature", ds, "model", refuse, point)
        # every value is the fill value
        ds = base.copy()
        t = ds.vars[r["T"]]
        fill = t.attrs.get("_FillValue", np.float32(9.96921e36))
        t.attrs["_FillValue"] = np.float32(fill)
        t.data = np.full_like(t.data, fill)
        corpus.add_dataset("all_fill", ds, "model", refuse, point)

        # --- data values
        def set_data(kind, var, function, expect=refuse):
            ds = base.copy()
            v = ds.vars[r[var]]
            v.data = function(v.data.astype("f8")).astype(v.dtype)
            corpus.add_dataset(kind, ds, "model", expect, point)

        set_data("data_nan", "T", lambda a: np.full_like(a, np.nan))
        set_data("data_inf", "T", lambda a: np.full_like(a, np.inf))
        set_data("data_zero", "T", lambda a: np.zeros_like(a))
        set_data("data_negative", "T", lambda a: -a)
        set_data("data_negative", "Z", lambda a: -a)
        set_data("data_negative", "H", lambda a: -np.abs(a) - 0.1)
        set_data("data_zero_humidity", "H", lambda a: np.zeros_like(a), either)

        def some_inf(a):
            a = a.copy()
            a.flat[rng.randrange(a.size)] = np.inf
            return a
        set_data("data_one_inf", "T", some_inf, either)

        def some_nan(a):
            a = a.copy()
            a.flat[rng.randrange(a.size)] = np.nan
            return a
        set_data("data_one_nan", "H", some_nan, either)
        if "PS" in r:
            for value in (0.0, -1e5, np.nan):
                set_data("surface_pressure_bad", "PS", lambda a, value=value: np.full_like(a, value))

        # --- pressure levels
        def set_levels(kind, function, expect=refuse):
            ds = base.copy()
            v = ds.vars[r["P"]]
            v.data = function(v.data.astype("f8")).astype(v.dtype)
            corpus.add_dataset(kind, ds, "model", expect, point)

        set_levels("levels_absurd", lambda p: p * 1e4)
        set_levels("levels_absurd", lambda p: -p)
        set_levels("levels_equal", lambda p: np.full_like(p, p[0]))

        def duplicate(p):
            p = p.copy()
            p[1] = p[0]
            return p
        set_levels("levels_duplicate", duplicate)
        set_levels("levels_permuted", lambda p: np.array(rng.sample(list(p), len(p))))
        ds = base.copy()
        v = ds.vars[r["P"]]
        v.data = np.array([str(x) for x in v.data], dtype=object)
        v.dtype = str
        corpus.add_dataset("levels_string", ds, "model", refuse, point)
        for keep in (1, 2):
            ds = base.subset(**{base.vars[r["P"]].dims[0]: slice(0, keep)})
            corpus.add_dataset("levels_too_few", ds, "model", refuse, point)

        # --- horizontal coordinates
        ds = base.copy()
        if "lat" in ds.vars:
            ds.vars["lat"].data = ds.vars["lat"].data + 200.0
            corpus.add_dataset("latitude_out_of_range", ds, "model", refuse, point)

        # --- dimensions: zero length and huge
        for dim_role in ("Y", "X", "P"):
            dim = base.vars[r[dim_role]].dims[0]
            corpus.add_dataset("dimension_zero", base.subset(**{dim: slice(0, 0)}), "model", refuse, point)
        corpus.add_dataset("dimension_zero", base.subset(time=slice(0, 0)), "model", refuse, point)
        ds = base.copy()  # a huge longitude/x dimension, never written (the file stays small)
        x_dim = base.vars[r["X"]].dims[0]
        ds.dims[x_dim] = 2 ** 31
        for var in ds.vars.values():
            if x_dim in var.dims:
                var.unwritten = True
                var.chunks = [1] * (len(var.dims) - 1) + [1024]
        corpus.add_dataset("dimension_huge", ds, "model", refuse, point)

        # --- two candidate variables for one quantity
        ds = base.copy()
        twin = ds.vars[r["T"]]
        ds.vars[r["T"] + "_copy"] = Var(twin.dims, twin.data.copy(), twin.attrs, twin.dtype)
        corpus.add_dataset("two_candidates", ds, "model", refuse, point)

        # --- fields split over two files that do not match
        first = base.copy()
        second = base.copy()
        del first.vars[r["H"]]
        for k in [r["T"], r["Z"]] + ([r["PS"]] if "PS" in r else []):
            del second.vars[k]
        good_first, good_second = corpus.path("split_files"), corpus.path("split_files").replace(".nc", "b.nc")
        first.write(good_first)
        second.write(good_second)
        corpus.add("split_files", [good_first, good_second], "model", [0], point)
        y_dim = base.vars[r["Y"]].dims[0]
        for variant in ("grid", "levels", "times"):
            other = second.copy()
            if variant == "grid":
                other = other.subset(**{y_dim: slice(0, base.length(y_dim) - 1)})
            elif variant == "levels":
                p = other.vars[r["P"]]
                p.data = (p.data * 0.9).astype(p.dtype)
            else:
                other.vars["time"].data = other.vars["time"].data + 1000.0
            a = corpus.path("split_files_mismatched")
            b = a.replace(".nc", "b.nc")
            first.write(a)
            other.write(b)
            # Pressure axes are matched by value: levels the files share may be analysed.
            corpus.add("split_files_mismatched", [a, b], "model", either if variant == "levels" else refuse, point)

    # --- not NetCDF at all
    point = bases["aurel"].point
    for data in (b"", b"temperature,pressure\n290,1000\n", b"\x89PNG\r\n\x1a\n" + bytes(200),
                 bytes(rng.randrange(256) for _ in range(4096)), b"\x89HDF\r\n\x1a\n" + bytes(2000),
                 b"CDF\x01" + bytes(64), b"CDF\x02" + bytes(rng.randrange(256) for _ in range(512))):
        corpus.add_bytes("not_netcdf", data, "model", refuse, point)
    os.remove(scratch)


def analysis_cases(corpus, analysis_paths):
    """Damaged outputs of latentlift analyze: for reproject, quicklook and climatology."""
    rng = corpus.rng
    scratch = os.path.join(corpus.out, "scratch.nc")
    either, refuse = [0, 2], [2]
    for source in analysis_paths:
        base = Dataset.read(source)
        base.attrs.pop("history", None)  # a time stamp: without it the same seed gives the same bytes
        corpus.add_dataset("analysis_clean", base.copy(), "analysis", [0])
        data = clean_bytes(base, "NETCDF4", scratch)
        for _ in range(20):
            corpus.add_bytes("analysis_byte_flip", flip_bytes(data, rng, rng.choice([1, 4, 32])), "analysis", either)
        for _ in range(6):
            corpus.add_bytes("analysis_truncated", truncate(data, rng), "analysis", refuse)
        for _ in range(8):
            corpus.add_bytes("analysis_zeroed_block", zero_block(data, rng), "analysis", either)
        ds = base.copy()
        ds.vars["latent_class"].data = np.full_like(ds.vars["latent_class"].data, 77)
        corpus.add_dataset("analysis_class_undeclared", ds, "analysis", refuse)
        ds = base.copy()
        ds.vars["mu_cape"].data = np.full_like(ds.vars["mu_cape"].data, np.inf)
        corpus.add_dataset("analysis_inf", ds, "analysis", refuse)
        ds = base.copy()
        for name in ("mu_cape", "latent_class"):
            ds.vars[name].attrs["scale_factor"] = np.array([1.0, 2.0], "f4")
        corpus.add_dataset("analysis_bad_packing", ds, "analysis", refuse)
        ds = base.copy()
        for var in ds.vars.values():
            if var.attrs.get("grid_mapping_name"):
                var.attrs["grid_mapping_name"] = "no_such_projection"
        corpus.add_dataset("analysis_bad_grid_mapping", ds, "analysis", refuse)
        for dim in [d for d in base.dims if d not in ("time",)][:2]:
            corpus.add_dataset("analysis_dimension_zero", base.subset(**{dim: slice(0, 0)}), "analysis", refuse)
        if "lat" in base.vars and base.vars["lat"].data.ndim == 1:
            ds = base.copy()
            ds.vars["lat"].data = ds.vars["lat"].data + 200.0
            corpus.add_dataset("analysis_latitude_out_of_range", ds, "analysis", refuse)
    if os.path.exists(scratch):
        os.remove(scratch)


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("out_dir", help="folder for the corpus and manifest.json")
    parser.add_argument("--seed", type=int, default=8, help="random seed (default 8)")
    parser.add_argument("--analysis", nargs="*", default=[], help="outputs of latentlift analyze to damage too")
    parser.add_argument("--write-bases", action="store_true",
                        help="only write the clean cut inputs (base-aurel.nc, base-coast.nc) and stop")
    args = parser.parse_args()
    bases = base_inputs()
    if args.write_bases:
        os.makedirs(args.out_dir, exist_ok=True)
        for name, ds in bases.items():
            ds.write(os.path.join(args.out_dir, f"base-{name}.nc"))
        return
    corpus = Corpus(args.out_dir, args.seed)
    model_cases(corpus, bases)
    analysis_cases(corpus, args.analysis)
    corpus.save()
    print(f"make_corpus: {len(corpus.cases)} cases in {args.out_dir}")


if __name__ == "__main__":
    main()
