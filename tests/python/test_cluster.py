"""latentlift.analyze on a dask.distributed cluster of worker processes equals the command line."""

import pytest
import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS, assert_same_output

distributed = pytest.importorskip("distributed")


def test_local_cluster_of_two_worker_processes_gives_the_command_line_output(cli_output):
    path = SAMPLE_GRIDS["lambert"]
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        with xr.open_dataset(path, chunks={"time": 1, "y": 33}) as ds:
            lazy = latentlift.analyze(ds, threads=1)
            result = lazy.compute()
        # Both worker processes took part (each block is one task).
        assert len(client.scheduler_info()["workers"]) == 2
    assert_same_output(result, cli_output(path), qc=False)
