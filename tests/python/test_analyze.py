"""latentlift.analyze equals the command line's analyze, on NumPy- and Dask-backed datasets."""

import numpy as np
import pytest
import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS, assert_same_output


def test_numpy_backed_dataset_gives_the_command_line_output(sample_grid, cli_output):
    # Reference: `latentlift analyze` on the same file (the program's own command line).
    with xr.open_dataset(sample_grid) as ds:
        result = latentlift.analyze(ds)
    assert_same_output(result, cli_output(sample_grid))


def test_dask_backed_dataset_in_one_chunk_gives_the_command_line_output(sample_grid, cli_output):
    with xr.open_dataset(sample_grid, chunks={}) as ds:
        result = latentlift.analyze(ds.chunk(-1))
        assert_same_output(result, cli_output(sample_grid), qc=False)


def test_dask_backed_dataset_in_several_chunks_gives_the_command_line_output(sample_grid, cli_output):
    with xr.open_dataset(sample_grid) as ds:
        horizontal = [d for d in ds.dims if d not in ("time", "plev", "isobaric")]
        chunked = ds.chunk({"time": 1, horizontal[0]: 17, horizontal[1]: 30})
        result = latentlift.analyze(chunked)
        assert result["mu_cape"].chunks is not None  # lazy until computed
        assert len(result["mu_cape"].data.chunks[0]) == ds.dims["time"]
        assert_same_output(result, cli_output(sample_grid), qc=False)


def test_level_fields_on_dask_chunks_give_the_command_line_level_fields(cli_output):
    path = SAMPLE_GRIDS["lambert"]
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds.chunk({"time": 2, "y": 40, "x": 50}), level_fields=True)
        assert_same_output(result, cli_output(path, "--level-fields"), qc=False)


def test_settings_as_keywords_act_like_set_options(cli_output):
    path = SAMPLE_GRIDS["latlon"]
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds, buoyancy="temperature", top_pressure_hpa=150, min_excess_k=0.05)
    expected = cli_output(path, "--set", "analysis.buoyancy=temperature", "--set", "analysis.top_pressure_hpa=150",
                          "--set", "analysis.min_excess_k=0.05")
    assert_same_output(result, expected)
    with xr.open_dataset(path) as ds:
        default = latentlift.analyze(ds)
    assert not np.array_equal(default["mu_cape"].values, result["mu_cape"].values, equal_nan=True)


def test_config_file_acts_like_the_config_option(cli_output, tmp_path):
    path = SAMPLE_GRIDS["latlon"]
    config = tmp_path / "run.toml"
    config.write_text("[analysis]\nsource_layer_hpa = 200\n")
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds, config=config)
    assert_same_output(result, cli_output(path, "--config", str(config)))


def test_numpy_result_records_the_quality_control_counts_of_the_run(cli_output):
    path = SAMPLE_GRIDS["latlon"]
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds)
    # 2 time steps x 37 x 72 columns (ncdump -h of the sample grid).
    assert result.attrs["qc_columns_analysed"] + result.attrs["qc_columns_skipped"] == 2 * 37 * 72


def test_lazy_result_written_with_to_netcdf_reads_back_as_the_command_line_output(cli_output, tmp_path):
    # The README's Dask example: chunked by time and latitude, written block by block.
    path = SAMPLE_GRIDS["latlon"]
    with xr.open_dataset(path, chunks={"time": 1, "lat": 19}) as ds:
        latentlift.analyze(ds).to_netcdf(tmp_path / "python.nc")
    with xr.open_dataset(tmp_path / "python.nc", mask_and_scale=False) as written:
        assert written["latent_class"].dtype == np.int8  # a byte flag field, like the file
    with xr.open_dataset(tmp_path / "python.nc") as written:
        assert_same_output(written, cli_output(path), qc=False)


def test_mu_parcel_keyword_acts_like_the_set_option(cli_output):
    path = SAMPLE_GRIDS["lambert"]
    with xr.open_dataset(path) as ds:
        result = latentlift.analyze(ds, mu_parcel="max_theta_w")
    assert_same_output(result, cli_output(path, "--set", "analysis.mu_parcel=max_theta_w"))


def test_the_gil_is_released_while_a_dask_block_is_analysed():
    # A Dask block is analysed by one C++ call on the dataset in memory; a second Python
    # thread keeps running meanwhile (with the GIL held it would stop for the whole call).
    import threading
    import time

    path = SAMPLE_GRIDS["lambert"]
    with xr.open_dataset(path) as ds:
        ds = ds.load()
    job = latentlift.datasets._Job(ds, None, [], False, 1)
    start = time.perf_counter()
    job.fields_in_memory(ds)
    single = time.perf_counter() - start
    repeats = max(1, int(np.ceil(0.6 / single)))
    big = xr.concat([ds.assign_coords(time=ds["time"] + np.timedelta64(6 * len(ds["time"]) * i, "h"))
                     for i in range(repeats)], "time")
    ticks, done = [], threading.Event()

    def ticker():
        while not done.is_set():
            ticks.append(time.perf_counter())

    side = threading.Thread(target=ticker)
    side.start()
    time.sleep(0.01)
    call_start = time.perf_counter()
    computed = job.fields_in_memory(big)
    call = time.perf_counter() - call_start
    done.set()
    side.join()
    assert computed["mu_cape"].shape[0] == repeats * ds.dims["time"]
    inside = np.array([t for t in ticks if call_start <= t <= call_start + call])
    gaps = np.diff(np.concatenate([[call_start], inside, [call_start + call]]))
    assert call > 0.3
    assert gaps.max() < 0.5 * call, (gaps.max(), call)
