"""Units are converted and errors raised exactly as by the command line (same message text)."""

import numpy as np
import pytest
import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS, run_cli


def cli_error(path, *args):
    code, _, err = run_cli("analyze", path, "-o", str(path) + ".out.nc", "--quiet", *args)
    assert code == 2, err
    return err.strip()


def damaged(tmp_path, change):
    """The lat/lon sample grid changed by `change`, written to a file (for the command line)."""
    with xr.open_dataset(SAMPLE_GRIDS["latlon"]) as ds:
        bad = change(ds.load())
    path = tmp_path / "damaged.nc"
    bad.to_netcdf(path)
    return str(path)


def python_error(path, expected_type, **settings):
    with xr.open_dataset(path) as ds:
        with pytest.raises(expected_type) as caught:
            latentlift.analyze(ds, **settings)
    return "latentlift: " + str(caught.value)


def test_missing_humidity_raises_the_command_line_message(tmp_path):
    path = damaged(tmp_path, lambda ds: ds.drop_vars("hur"))
    assert python_error(path, latentlift.InputError) == cli_error(path)


def test_unconvertible_temperature_units_raise_the_command_line_message(tmp_path):
    def relabel(ds):
        ds["ta"].attrs["units"] = "m s-1"
        return ds

    path = damaged(tmp_path, relabel)
    message = python_error(path, latentlift.InputError)
    assert message == cli_error(path)
    assert "ta" in message and "K" in message


def test_unknown_setting_raises_the_command_line_usage_message(tmp_path):
    path = SAMPLE_GRIDS["latlon"]
    assert python_error(path, latentlift.UsageError, colour="red") == cli_error(path, "--set", "analysis.colour=red")


def test_bad_setting_value_raises_the_command_line_usage_message():
    path = SAMPLE_GRIDS["latlon"]
    message = python_error(path, latentlift.UsageError, buoyancy="potential")
    assert message == cli_error(path, "--set", "analysis.buoyancy=potential")


def test_input_errors_are_also_usage_of_the_common_base_class(tmp_path):
    path = damaged(tmp_path, lambda ds: ds.drop_vars("hur"))
    python_error(path, latentlift.Error)


def test_temperature_in_celsius_and_pressure_in_hpa_are_converted_like_the_command_line(tmp_path, cli_output):
    # 0 degC = 273.15 K (SI Brochure, 9th edition, 2.3.1); 1 hPa = 100 Pa.
    def to_celsius_and_hpa(ds):
        ds["ta"] = ds["ta"].astype("float64") - 273.15
        ds["ta"].attrs.update(units="degC", standard_name="air_temperature")
        ds["ta"].encoding = {}
        ds = ds.assign_coords(plev=ds["plev"] / 100.0)
        ds["plev"].attrs.update(units="hPa", standard_name="air_pressure")
        return ds

    path = damaged(tmp_path, to_celsius_and_hpa)
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds)
    expected = cli_output(path)
    original = cli_output(SAMPLE_GRIDS["latlon"])
    for name in ("mu_cape", "mu_pressure", "latent_layer_depth"):
        np.testing.assert_array_equal(result[name].values, expected[name].values, err_msg=name)
        np.testing.assert_allclose(result[name].values, original[name].values, rtol=1e-4, atol=1e-2, err_msg=name)


def test_an_implausible_quantity_in_several_chunks_is_refused_by_analyze_before_computing(tmp_path):
    # Temperatures in degC labelled K: the whole-dataset sample check (medians of the columns
    # the command line samples) runs once when analyze is called, with its message.
    def celsius_labelled_kelvin(ds):
        ds["ta"].values = ds["ta"].values - 273.15
        return ds

    path = damaged(tmp_path, celsius_labelled_kelvin)
    with xr.open_dataset(path, chunks={"time": 1, "lat": 10}) as ds:
        with pytest.raises(latentlift.InputError) as caught:
            latentlift.analyze(ds)
    message = "latentlift: " + str(caught.value)
    assert message == cli_error(path)
    assert "median" in message
