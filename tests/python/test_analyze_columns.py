"""latentlift.analyze_columns: the kernel over NumPy arrays (levels last, SI units, NaN missing)."""

import threading
import time

import numpy as np
import pytest
import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS

STANDARD_GRAVITY = 9.80665  # m s-2, geopotential height = geopotential / g (CGPM 1901)


def sample_columns(dtype=np.float64):
    """The lat/lon sample grid as SI arrays [time, lat, lon, level], converted here by hand."""
    with xr.open_dataset(SAMPLE_GRIDS["latlon"]) as ds:
        order = ("time", "lat", "lon", "plev")
        temp_k = ds["ta"].transpose(*order).values.astype(dtype)
        rh = (ds["hur"].transpose(*order).values / 100.0).astype(dtype)  # % -> fraction (common practice)
        height_m = (ds["z"].transpose(*order).values / STANDARD_GRAVITY).astype(dtype)
        ps_pa = ds["ps"].transpose("time", "lat", "lon").values.astype(dtype)
        pressure_pa = ds["plev"].values.astype(dtype)  # units Pa in the file
    return temp_k, rh, pressure_pa, height_m, ps_pa


def run(dtype=np.float64, **kw):
    temp_k, rh, p, z, ps = sample_columns(dtype)
    return latentlift.analyze_columns(temp_k, rh, p, humidity_kind="relative_humidity", height_m=z,
                                      surface_pressure_pa=ps, **kw)


def test_fields_equal_the_command_line_output_on_the_sample_grid(cli_output):
    fields = run()
    expected = cli_output(SAMPLE_GRIDS["latlon"]).transpose("time", "lat", "lon")
    for name in ("latent_layer_depth", "mu_cape", "mu_cin", "mu_pressure", "mu_lift_to_lfc", "easiest_lift"):
        np.testing.assert_allclose(fields[name], expected[name].values, rtol=1e-4, atol=1e-3, err_msg=name)
    classes = expected["latent_class"].values
    assert np.array_equal(np.where(np.isnan(classes), -1, classes).astype(np.int8), fields["latent_class"])
    assert fields["qc"]["columns_analysed"] + fields["qc"]["columns_skipped"] == 2 * 37 * 72


def test_any_float_dtype_gives_the_same_result():
    as32 = run(np.float32)
    temp_k, rh, p, z, ps = (a.astype(np.float64) for a in sample_columns(np.float32))
    as64 = latentlift.analyze_columns(temp_k, rh, p, humidity_kind="relative_humidity", height_m=z,
                                      surface_pressure_pa=ps)
    for name in ("mu_cape", "latent_layer_depth", "latent_class"):
        np.testing.assert_array_equal(as32[name], as64[name])


def test_pressure_per_column_equals_pressure_per_level():
    temp_k, rh, p, z, ps = sample_columns()
    per_level = latentlift.analyze_columns(temp_k, rh, p, humidity_kind="relative_humidity", height_m=z)
    per_column = latentlift.analyze_columns(temp_k, rh, np.broadcast_to(p, temp_k.shape), height_m=z,
                                            humidity_kind="relative_humidity")
    for name in ("mu_cape", "latent_layer_depth", "latent_class"):
        np.testing.assert_array_equal(per_level[name], per_column[name])


def test_missing_heights_leave_only_the_height_fields_missing():
    temp_k, rh, p, z, ps = sample_columns()
    with_z = latentlift.analyze_columns(temp_k, rh, p, humidity_kind="relative_humidity", height_m=z)
    without = latentlift.analyze_columns(temp_k, rh, p, humidity_kind="relative_humidity")
    np.testing.assert_array_equal(with_z["mu_cape"], without["mu_cape"])
    layered = with_z["latent_layer_depth"] > 0
    assert layered.sum() > 10
    assert np.isnan(without["latent_layer_depth_z"][layered]).all()
    assert not np.isnan(with_z["latent_layer_depth_z"][layered]).any()


def test_dew_point_equal_to_temperature_is_relative_humidity_one():
    # Saturated air: dew point = temperature, relative humidity 1 (definition; common practice).
    temp_k, _, p, z, _ = sample_columns()
    saturated_rh = latentlift.analyze_columns(temp_k, np.ones_like(temp_k), p, humidity_kind="relative_humidity",
                                              height_m=z)
    saturated_td = latentlift.analyze_columns(temp_k, temp_k, p, humidity_kind="dew_point_temperature", height_m=z)
    np.testing.assert_allclose(saturated_rh["mu_cape"], saturated_td["mu_cape"], rtol=1e-3, atol=0.5)


def test_specific_humidity_and_mixing_ratio_agree():
    # q = r / (1 + r) (definition; e.g. AMS Glossary of Meteorology, "specific humidity").
    temp_k, _, p, z, _ = sample_columns()
    r = np.full_like(temp_k, 0.008) * (p / 100000.0)
    as_r = latentlift.analyze_columns(temp_k, r, p, humidity_kind="humidity_mixing_ratio", height_m=z)
    as_q = latentlift.analyze_columns(temp_k, r / (1.0 + r), p, humidity_kind="specific_humidity", height_m=z)
    np.testing.assert_allclose(as_r["mu_cape"], as_q["mu_cape"], rtol=1e-4, atol=0.05)


def test_level_fields_have_the_shape_of_the_input():
    temp_k, rh, p, z, ps = sample_columns()
    fields = latentlift.analyze_columns(temp_k[0], rh[0], p, humidity_kind="relative_humidity", height_m=z[0],
                                        level_fields=True)
    assert fields["wet_bulb_temperature"].shape == temp_k[0].shape
    assert fields["stability_class"].dtype == np.int8
    assert fields["mu_cape"].shape == temp_k[0].shape[:-1]


def test_wrong_shapes_are_usage_errors():
    temp_k, rh, p, z, ps = sample_columns()
    with pytest.raises(latentlift.UsageError, match="humidity"):
        latentlift.analyze_columns(temp_k, rh[..., :-1], p)
    with pytest.raises(latentlift.UsageError, match="pressure_pa"):
        latentlift.analyze_columns(temp_k, rh, p[:-1])
    with pytest.raises(latentlift.UsageError, match="humidity_kind"):
        latentlift.analyze_columns(temp_k, rh, p, humidity_kind="wetness")


def test_the_gil_is_released_while_columns_are_analysed():
    # While one thread runs the kernel, a second Python thread keeps running: with the GIL held
    # it would stop for the whole call (a gap as long as the call between its clock readings).
    temp_k, rh, p, z, ps = sample_columns()
    big = [np.concatenate([a] * 8) for a in (temp_k, rh, z)]
    start = time.perf_counter()
    latentlift.analyze_columns(big[0], big[1], p, humidity_kind="relative_humidity", height_m=big[2], threads=1)
    single = time.perf_counter() - start
    repeats = max(1, int(np.ceil(0.6 / single)))
    big = [np.concatenate([a] * repeats) for a in big]
    ticks, done = [], threading.Event()

    def ticker():
        while not done.is_set():
            ticks.append(time.perf_counter())

    def kernel():
        latentlift.analyze_columns(big[0], big[1], p, humidity_kind="relative_humidity", height_m=big[2], threads=1)

    worker = threading.Thread(target=kernel)
    side = threading.Thread(target=ticker)
    side.start()
    time.sleep(0.01)
    call_start = time.perf_counter()
    worker.start()
    worker.join()
    call = time.perf_counter() - call_start
    done.set()
    side.join()
    inside = np.array([t for t in ticks if call_start <= t <= call_start + call])
    gaps = np.diff(np.concatenate([[call_start], inside, [call_start + call]]))
    assert call > 0.3
    assert gaps.max() < 0.5 * call, (gaps.max(), call)


def test_mu_parcel_rule_is_a_setting():
    by_cape = run(mu_parcel="max_cape")
    by_theta_w = run(mu_parcel="max_theta_w")
    # The most-unstable parcel by its CAPE has at least the CAPE of the one by its theta_w (METHODS).
    both = ~np.isnan(by_cape["mu_cape"]) & ~np.isnan(by_theta_w["mu_cape"])
    assert (by_cape["mu_cape"][both] >= by_theta_w["mu_cape"][both] - 1e-3).all()
    with pytest.raises(latentlift.UsageError, match="mu_parcel"):
        run(mu_parcel="warmest")
