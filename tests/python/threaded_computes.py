"""Helper of test_threaded_scheduler.py, run in a child process (so that a deadlock ends in
the parent's timeout instead of hanging the suite):

    python threaded_computes.py INPUT CLI_OUTPUT REPEATS

Opens INPUT lazily in 6 chunks (time and y), computes latentlift.analyze on Dask's threaded
scheduler REPEATS times - the input read by Dask tasks through xarray while other threads
analyse blocks - and checks every result against CLI_OUTPUT (`latentlift analyze INPUT`)."""

import sys

import dask
import xarray as xr

import latentlift
from conftest import assert_same_output


def main(path, expected_path, repeats):
    with xr.open_dataset(expected_path) as opened:
        expected = opened.load()
    with dask.config.set(scheduler="threads", num_workers=4), \
            xr.open_dataset(path, chunks={"time": 1, "y": 33, "x": -1}) as ds:
        for _ in range(repeats):
            lazy = latentlift.analyze(ds, threads=1)
            assert lazy["mu_cape"].data.npartitions == 6
            assert_same_output(lazy.compute(), expected, qc=False)
    print("computed", repeats, "times")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]))
