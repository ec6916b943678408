"""latentlift.column equals `latentlift column --format json`."""

import json
import math

import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS, run_cli


def cli_report(path, *args):
    code, out, err = run_cli("column", path, "--format", "json", *args)
    assert code == 0, err
    return json.loads(out)


def same(a, b):
    return (a is None and (b is None or (isinstance(b, float) and math.isnan(b)))) or a == b


def test_column_table_and_summary_equal_the_command_line_json():
    path = SAMPLE_GRIDS["lambert"]
    expected = cli_report(path, "--lat", "41.5", "--lon", "-150", "--time", "2")
    with xr.open_dataset(path) as ds:
        table = latentlift.column(ds, lat=41.5, lon=-150, time=2)
    assert list(table.columns) == list(expected["levels"][0].keys())
    assert len(table) == len(expected["levels"])
    for row, level in zip(table.to_dict("records"), expected["levels"]):
        for key, value in level.items():
            assert same(value, row[key]), (key, value, row[key])
    for key, value in expected["summary"].items():
        assert same(value, table.attrs[key]), key
    for key in ("column", "latitude", "longitude", "distance_km", "time_index"):
        assert table.attrs[key] == expected[key]
    assert table.attrs["file"] == path


def test_column_passes_settings_like_set_options():
    path = SAMPLE_GRIDS["latlon"]
    expected = cli_report(path, "--lat", "10", "--lon", "20", "--set", "analysis.buoyancy=temperature")
    with xr.open_dataset(path) as ds:
        table = latentlift.column(ds, lat=10, lon=20, buoyancy="temperature")
    assert same(expected["summary"]["mu_cape"], table.attrs["mu_cape"])
