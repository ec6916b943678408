"""Shared fixtures of the Python suite: the sample grids, and the command line to compare with.

Run by ctest (tests/CMakeLists.txt) with PYTHONPATH at the build tree's copy of the module and
LATENTLIFT_BINARY at the built executable; by hand:
    PYTHONPATH=build/python LATENTLIFT_BINARY=build/latentlift python3 -m pytest tests/python
"""

import os
import subprocess

import numpy as np
import pytest
import xarray as xr

SOURCE_DIR = os.path.realpath(os.environ.get("LATENTLIFT_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", "..")))
SAMPLE_GRIDS = {
    "latlon": os.path.join(SOURCE_DIR, "sample_grids", "aurel_global_5deg.nc"),
    "lambert": os.path.join(SOURCE_DIR, "sample_grids", "vessaline_coast_lcc.nc"),
}
# Run-specific global attributes (when and how it ran, what it read): not compared.
RUN_ATTRIBUTES = {"history", "input_files"}
QC_ATTRIBUTES = {"qc_columns_analysed", "qc_columns_skipped", "qc_humidity_clipped", "qc_dew_point_corrected",
                 "qc_temperature_rejected", "qc_surface_pressure_rejected"}


def binary():
    return os.environ.get("LATENTLIFT_BINARY", os.path.join(SOURCE_DIR, "build", "latentlift"))


def run_cli(*args):
    """Run the latentlift executable; returns (exit code, stdout, stderr)."""
    done = subprocess.run([binary(), *map(str, args)], capture_output=True, text=True, timeout=600)
    return done.returncode, done.stdout, done.stderr


@pytest.fixture(params=sorted(SAMPLE_GRIDS))
def sample_grid(request):
    return SAMPLE_GRIDS[request.param]


_cli_outputs = {}


@pytest.fixture
def cli_output(tmp_path_factory):
    """The command line's output for (input, extra args), opened with xarray; computed once."""

    def get(path, *args):
        key = (path, args)
        if key not in _cli_outputs:
            out = tmp_path_factory.mktemp("cli") / "out.nc"
            code, _, err = run_cli("analyze", path, "-o", out, "--quiet", *args)
            assert code == 0, err
            with xr.open_dataset(out) as opened:
                _cli_outputs[key] = opened.load()
        return _cli_outputs[key]

    return get


def assert_same_output(result, expected, qc=True):
    """Same variables, values (NaN where the file has its fill value), dims, coordinates and attributes."""
    result = result.compute()
    assert sorted(result.data_vars) == sorted(expected.data_vars)
    assert sorted(result.coords) == sorted(expected.coords)
    for name, var in expected.variables.items():
        got = result[name]
        assert got.dims == var.dims, name
        assert got.dtype == var.dtype, name
        assert_same_attributes(got.attrs, var.attrs, name)
        np.testing.assert_array_equal(got.values, var.values, err_msg=name)
    skip = RUN_ATTRIBUTES | (set() if qc else QC_ATTRIBUTES)
    assert_same_attributes({k: v for k, v in result.attrs.items() if k not in skip},
                           {k: v for k, v in expected.attrs.items() if k not in skip}, "global")


def assert_same_attributes(got, expected, where):
    assert sorted(got) == sorted(expected), where
    for key, value in expected.items():
        assert np.array_equal(np.asarray(got[key]), np.asarray(value)), f"{where}: {key}"
