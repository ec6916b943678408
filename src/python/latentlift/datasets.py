"""The xarray layer: ``analyze`` and ``column`` on datasets.

Every rule of the command line (quantities by CF standard_name then configured aliases,
UDUNITS-2 unit conversions, packing and fill values, the vertical coordinate found by its
units, the checks and their messages) lives once, in the C++ reader. This layer therefore
hands the reader what it reads everywhere else - a NetCDF file - and never decides
anything about quantities itself:

* NumPy-backed datasets are written to a temporary file and analysed by the command line's
  own pipeline and writer, in process; the result is that output file, loaded.
* Dask-backed datasets are analysed lazily, one task per Dask block (``xarray.map_blocks``,
  the pressure dimension in one chunk, blocks over the horizontal and outer dimensions). Each
  block is handed to the same reader and pipeline in memory - its variables as a NetCDF file
  would store them (xarray's own CF encoding: packing, fill values, times as numbers) with
  their attributes - and its fields come back as arrays: no file is written or read, no
  netCDF lock is taken and the GIL is released, so blocks run side by side on Dask's threaded
  scheduler. The result's variables, attributes,
  coordinates and grid mapping come, before anything is computed, from the writer run on
  the dataset's metadata (coordinates written, fields left unwritten), so errors in the
  metadata are raised by ``analyze`` itself, those in the data when it is computed.

Error messages name the dataset's source file (``ds.encoding["source"]``) where the
command line names its input, or ``<xarray.Dataset>`` for a dataset built in memory.
"""

from __future__ import annotations

import json
import os
import tempfile
from typing import Any, Iterable, Mapping

import numpy as np
import pandas as pd
import xarray as xr
from xarray.backends.netCDF4_ import NETCDF4_PYTHON_LOCK

from latentlift import _core
from latentlift.settings import config_path_of, overrides_of

# Encoding kept when a dataset is written for the reader: what makes the file's raw values and
# attributes those of the original (packing, fill value, time units); storage details dropped.
_ENCODING_KEPT = ("dtype", "scale_factor", "add_offset", "_FillValue", "missing_value", "units", "calendar")
# netCDF-C is not thread-safe. xarray's netCDF4 backend serialises its calls on this lock; the
# C++ library's file calls (a NumPy-backed dataset, the template of a lazy result, column) run
# while it is held too. Dask blocks are analysed in memory and take no lock.
_NETCDF_LOCK = NETCDF4_PYTHON_LOCK
# Encoding attributes by which xarray decodes a field's stored values (masking, packing).
_DECODED_ATTRIBUTES = ("_FillValue", "missing_value", "scale_factor", "add_offset")
# Global attributes that only a complete run knows (QC counts summed over every column).
_RUN_ATTRIBUTES = ("qc_columns_analysed", "qc_columns_skipped", "qc_humidity_clipped", "qc_dew_point_corrected",
                   "qc_temperature_rejected", "qc_surface_pressure_rejected")


def analyze(
    ds: xr.Dataset,
    *,
    config: str | os.PathLike | None = None,
    level_fields: bool = False,
    threads: int = 0,
    overrides: Iterable[str] | Mapping[str, Any] | None = None,
    **settings: Any,
) -> xr.Dataset:
    """``latentlift analyze`` on a dataset: the same variables, attributes, coordinates and
    grid mapping as its output file opened with xarray.

    Settings are the config keys of section ``analysis`` as keywords (``buoyancy``,
    ``top_pressure_hpa``, ``source_layer_hpa``, ``min_excess_k``, ``mu_parcel``), ``config``
    a TOML file like ``--config``, ``overrides`` any other
    ``section.key=value`` like ``--set``; ``level_fields`` adds the per-level fields and
    ``threads`` sets the OpenMP threads of each block (0: all cores).

    NumPy-backed: computed now; the global attributes carry the QC counts like the file.
    Dask-backed: lazy, one task per block; the QC counts (sums over every column) are not
    known before computing and are left out of the attributes.
    """
    if not isinstance(ds, xr.Dataset):
        raise TypeError("analyze: expected an xarray.Dataset")
    job = _Job(ds, config, overrides_of(settings, overrides), bool(level_fields), int(threads))
    if not _is_lazy(ds):
        return job.analyze_now(ds)
    return job.analyze_lazily(ds)


def column(
    ds: xr.Dataset,
    lat: float,
    lon: float,
    time: int = 0,
    *,
    config: str | os.PathLike | None = None,
    overrides: Iterable[str] | Mapping[str, Any] | None = None,
    **settings: Any,
) -> pd.DataFrame:
    """``latentlift column --lat LAT --lon LON --time INDEX``: the level table of the grid
    column nearest to the point (bottom up) as a DataFrame, with the column's position and
    summary values (``mu_cape``, ``latent_class`` ...) in ``.attrs``."""
    name = _display_name(ds)
    variables, attributes = _stored(ds)  # in memory, like a Dask block (a lazy dataset is computed)
    text = _core.column_report(name, variables, attributes, float(lat), float(lon), int(time), "json",
                               config_path_of(config), overrides_of(settings, overrides))
    report = json.loads(text)
    report["file"] = name
    table = pd.DataFrame(report.pop("levels"))
    summary = report.pop("summary")
    table.attrs.update(report)
    table.attrs.update(summary)
    return table


class _Job:
    """One call of ``analyze``: the settings and the dataset's display name."""

    def __init__(self, ds, config, overrides, level_fields, threads):
        self.name = _display_name(ds)
        self.config = config_path_of(config)
        self.overrides = overrides
        self.level_fields = level_fields
        self.threads = threads
        self.history = "latentlift.analyze (Python) on " + self.name

    def fields_in_memory(self, ds: xr.Dataset, part_of_dataset: bool = False) -> xr.Dataset:
        """The fields of ds (held in memory, numeric values) as a Dataset on ds's dimensions,
        the QC counts of the run in its attributes (``qc_...``). part_of_dataset: ds is one
        block of a larger dataset (no error for a block in which nothing can be analysed)."""
        variables, attributes = _stored(ds)
        out = _core.analyze_dataset(self.name, variables, attributes, self.config, self.overrides, self.level_fields,
                                    self.threads, part_of_dataset)
        outer, horizontal = list(out["outer_dims"]), list(out["horizontal_dims"])
        outer_shape, horizontal_shape = list(out["outer_shape"]), list(out["horizontal_shape"])
        result = xr.Dataset()
        for name, values in out["fields"].items():
            if values.ndim == 3:  # [step, level, column]
                dims = outer + [out["vertical_dim"]] + horizontal
                shape = outer_shape + [values.shape[1]] + horizontal_shape
            else:
                dims, shape = outer + horizontal, outer_shape + horizontal_shape
            result[name] = (dims, values.reshape(shape))
        result.attrs = {"qc_" + key: value for key, value in out["qc"].items()}
        return result

    def check_sample(self, ds: xr.Dataset) -> None:
        """The reader's plausibility check of each quantity as a whole, on the columns the
        command line samples (three part-rows of the first step; on unstructured grids three
        runs of cells), computed from the lazy dataset: a few rows, not the dataset."""
        variables, attributes = _stored(ds, lazy_values=False)
        grid = _core.read_dataset(self.name, variables, attributes, self.config, self.overrides, False)
        sample = ds.isel(_sample_positions(grid)).compute()
        variables, attributes = _stored(sample)
        _core.read_dataset(self.name, variables, attributes, self.config, self.overrides, True)

    def analyze_now(self, ds: xr.Dataset) -> xr.Dataset:
        """The whole dataset in memory (one part): the template's metadata, the fields of the
        run and its QC counts, as the command line's output file reads."""
        template, fields, _ = self.template(ds)
        computed = self.fields_in_memory(ds)
        result = template.copy()
        for name, var in _decoded(computed, {name: template[name].encoding for name in fields}).items():
            result[name] = result[name].copy(data=var.transpose(*result[name].dims).values)
        for key, value in computed.attrs.items():  # the run's QC counts, in the writer's places and types
            if key in result.attrs:
                result.attrs[key] = np.asarray(value, dtype=np.asarray(result.attrs[key]).dtype)[()]
        return self._finish(result)

    def template(self, ds: xr.Dataset) -> tuple[xr.Dataset, list[str], str]:
        """What the writer writes for ds before any field value (variables, attributes,
        coordinates, grid mapping; QC counts 0), with level fields only if asked for; the
        names of the fields and of the pressure dimension."""
        with tempfile.TemporaryDirectory(prefix="latentlift-") as tmp:
            source = os.path.join(tmp, "metadata.nc")
            target = os.path.join(tmp, "template.nc")
            _write_metadata(ds, source)
            _translated({source: self.name}, _core.write_output_template, [source], target, self.config,
                        self.overrides, True, self.history)
            template = _load(target)
        # The pressure dimension: the one the per-level fields have beside the maps' dimensions.
        map_dims = template["latent_layer_depth"].dims
        vertical = [d for d in template["wet_bulb_temperature"].dims if d not in map_dims][0]
        if not self.level_fields:
            template = template.drop_vars([v for v in template.data_vars if vertical in template[v].dims])
            template = template.drop_dims(vertical, errors="ignore")
        fields = [v for v in template.data_vars if template[v].dims]
        return template, fields, vertical

    def analyze_lazily(self, ds: xr.Dataset) -> xr.Dataset:
        template, fields, vertical = self.template(ds)
        ds = ds.unify_chunks().chunk({vertical: -1})
        chunks = dict(ds.chunks)
        blocks = xr.Dataset(coords={d: ds[d] for d in template.dims if d in ds.indexes})
        for name in fields:
            var = template[name]
            shape = tuple(template.dims[d] for d in var.dims)
            block_chunks = tuple(chunks.get(d, (template.dims[d],)) for d in var.dims)
            import dask.array

            data = dask.array.empty(shape, chunks=block_chunks, dtype=var.dtype)
            blocks[name] = xr.DataArray(data, dims=var.dims, attrs=var.attrs)
            blocks[name].encoding = _clean_encoding(var.encoding)
        several = any(len(c) > 1 for c in chunks.values())
        if several:  # the blocks are not judged on samples: the whole dataset is, once, now
            self.check_sample(ds)
        stored = {name: _clean_encoding(template[name].encoding) for name in fields}
        result = xr.map_blocks(_analyze_block, ds, kwargs={"job": self, "stored": stored, "part": several},
                               template=blocks)
        extra = template.drop_vars(fields)
        # Coordinates as the writer wrote them (map_blocks rebuilds indexes in pandas' dtypes).
        result = result.assign_coords({c: extra[c] for c in extra.coords})
        for name in extra.data_vars:
            result[name] = extra[name]
        for name in fields:
            result[name].attrs = template[name].attrs
            result[name].encoding = _clean_encoding(template[name].encoding)
        result.attrs = {k: v for k, v in template.attrs.items() if k not in _RUN_ATTRIBUTES}
        return self._finish(result, keep_run_attributes=False)

    def _finish(self, result: xr.Dataset, keep_run_attributes: bool = True) -> xr.Dataset:
        if "input_files" in result.attrs:
            result.attrs["input_files"] = self.name
        for var in result.variables.values():
            var.encoding.pop("source", None)
        result.encoding = {}
        return result


def _analyze_block(block: xr.Dataset, job: _Job, stored: Mapping[str, dict], part: bool) -> xr.Dataset:
    """One Dask block through the command line's reader and pipeline, in memory (runs on the
    workers; no file, no netCDF lock, the GIL released while C++ works). Each field is decoded
    by xarray from its values as the writer stores them (``stored``: the template's encoding,
    e.g. latent_class as bytes with _FillValue -1), as if the output file had been read."""
    result = _decoded(job.fields_in_memory(block, part), stored)
    return result.assign_coords({d: block[d] for d in result.dims if d in block.indexes})


def _decoded(fields: xr.Dataset, stored: Mapping[str, Mapping[str, Any]]) -> xr.Dataset:
    """The fields named in ``stored`` decoded by xarray from their values as the writer stores
    them (``stored``: each field's encoding in the template), as if read from the output file."""
    result = xr.Dataset()
    for name, encoding in stored.items():
        var = fields[name].variable
        attrs = {k: v for k, v in encoding.items() if k in _DECODED_ATTRIBUTES}
        result[name] = xr.conventions.decode_cf_variable(name, xr.Variable(var.dims, var.values, attrs))
    return result


def _is_lazy(ds: xr.Dataset) -> bool:
    return any(var.chunks is not None for var in ds.data_vars.values())


def _display_name(ds: xr.Dataset) -> str:
    source = ds.encoding.get("source")
    return os.fspath(source) if source else "<xarray.Dataset>"


def _clean_encoding(encoding: Mapping[str, Any]) -> dict:
    return {k: v for k, v in encoding.items() if k in _ENCODING_KEPT}


def _for_reader(ds: xr.Dataset) -> xr.Dataset:
    """ds with the encoding that reproduces its file's raw values, storage details dropped."""
    out = ds.copy(deep=False)
    for var in out.variables.values():
        var.encoding = _clean_encoding(var.encoding)
    out.encoding = {}
    return out


def _load(path: str, variables: list[str] | None = None) -> xr.Dataset:
    """An output file, loaded into memory and closed."""
    with xr.open_dataset(path) as opened:
        return (opened if variables is None else opened[variables]).load()


def _stored(ds: xr.Dataset, lazy_values: bool = True) -> tuple[list, dict]:
    """ds's variables as a NetCDF file would store them - xarray's own CF encoding, as
    ``to_netcdf`` applies it (packing, fill values, times as numbers) - for the C++ reader:
    (name, dims, dtype, attributes, shape, values) per variable, and the global attributes.
    lazy_values False: Dask-backed fields (data variables of 3 or more dimensions) are not
    computed (None: not given); coordinates and 2-D variables are."""
    variables, attributes = xr.conventions.encode_dataset_coordinates(_for_reader(ds))
    variables, attributes = xr.conventions.cf_encoder(variables, attributes)
    stored = []
    for name, var in variables.items():
        given = lazy_values or var.chunks is None or name in ds.coords or var.ndim < 3
        values = np.asarray(var.values) if given else None
        dtype = var.dtype
        numeric = dtype.kind in "biuf"
        stored.append((str(name), [str(d) for d in var.dims], dtype.name if numeric else "text",
                       {str(k): _memory_attribute(v) for k, v in var.attrs.items()}, list(var.shape),
                       values if numeric else None))
    return stored, {str(k): _memory_attribute(v) for k, v in attributes.items()}


def _sample_positions(grid: Mapping[str, Any]) -> dict:
    """Indices of the columns the reader samples (src/io/reader.cpp check_sampled_columns):
    the first index of every outer dimension; three rows at 1/4, 2/4 and 3/4 of the grid and
    their first 1024 columns, or three runs of 1024 cells on an unstructured grid."""
    positions = {d: [0] for d in grid["outer_dims"]}
    dims, lengths = list(grid["horizontal_dims"]), list(grid["horizontal_shape"])
    if len(dims) == 2:
        positions[dims[0]] = sorted({lengths[0] * q // 4 for q in (1, 2, 3)})
        positions[dims[1]] = list(range(min(1024, lengths[1])))
    else:
        cells = set()
        for q in (1, 2, 3):
            begin = lengths[0] * q // 4
            cells.update(range(begin, min(lengths[0], begin + 1024)))
        positions[dims[0]] = sorted(cells)
    return positions


def _memory_attribute(value: Any) -> Any:
    """An attribute as text or numbers (a list of texts: its first, as the reader reads a file's)."""
    if isinstance(value, (str, bytes)):
        return value
    values = np.atleast_1d(np.asarray(value))
    if values.dtype.kind in "OUS":
        return str(values[0]) if values.size else ""
    return values.astype(np.float64)


def _write_metadata(ds: xr.Dataset, path: str) -> None:
    """A NetCDF file with ds's dimensions, variables and attributes, and the values of
    everything but its fields (left unwritten): what the reader and writer need to decide
    everything but the field values."""
    import netCDF4

    prepared = _for_reader(ds)
    variables, attributes = xr.conventions.encode_dataset_coordinates(prepared)
    variables, attributes = xr.conventions.cf_encoder(variables, attributes)
    # Left unwritten: lazy data, and fields of 3 or more dimensions (their values are read in
    # memory, not from this file; coordinates, 2-D lat/lon and the grid mapping are written).
    lazy = {name for name, var in ds.data_vars.items() if var.chunks is not None or var.ndim >= 3}
    # Values computed before taking the lock: Dask reads of the inputs take it themselves.
    values = {name: np.asarray(var.values) for name, var in variables.items() if name not in lazy}
    with _NETCDF_LOCK, netCDF4.Dataset(path, "w", format="NETCDF4") as nc:
        for dim, length in prepared.dims.items():
            nc.createDimension(dim, length)
        for name, var in variables.items():
            attrs = dict(var.attrs)
            fill = attrs.pop("_FillValue", None)
            dtype = var.dtype
            if dtype.kind in "OU":
                dtype = str
            out = nc.createVariable(name, dtype, var.dims, fill_value=fill)
            out.setncatts({k: _nc_attribute(v) for k, v in attrs.items()})
            if name in values:
                out.set_auto_maskandscale(False)
                out[...] = values[name]
        nc.setncatts({k: _nc_attribute(v) for k, v in attributes.items()})


def _nc_attribute(value: Any) -> Any:
    return value if not isinstance(value, bool) else int(value)


def _translated(names: Mapping[str, str], function, *args):
    """Call into C++ (which reads and writes NetCDF files); messages name the dataset rather
    than the temporary file written for it."""
    try:
        with _NETCDF_LOCK:
            return function(*args)
    except _core.Error as error:
        message = str(error)
        for temporary, shown in names.items():
            message = message.replace(temporary, shown)
        raise type(error)(message) from None
