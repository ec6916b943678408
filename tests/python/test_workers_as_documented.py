"""The README's way of pointing a Dask cluster's workers at the module, run as written: a
scheduler and a worker started with build/python-env's interpreter, and a worker from a
separate environment into which the README's pip command installed the built module; the
analysis computed on them equals the command line's output."""

import os
import socket
import subprocess
import sys
import time

import pytest
import xarray as xr

import latentlift
from conftest import SAMPLE_GRIDS, SOURCE_DIR, assert_same_output

distributed = pytest.importorskip("distributed")

BUILD_DIR = os.path.realpath(os.environ.get("LATENTLIFT_BUILD_DIR", os.path.join(SOURCE_DIR, "build")))
ENV_PYTHON = os.path.join(BUILD_DIR, "python-env", "bin", "python")


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.skipif(not os.path.exists(ENV_PYTHON), reason="no build/python-env: scripts/setup.sh makes it")
def test_workers_started_as_the_readme_says_give_the_command_line_output(cli_output, tmp_path):
    # The workers import latentlift from their environments, not from the build tree.
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    # README: "install the built module into the workers' own environment".
    own = tmp_path / "worker-env"
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(own)], check=True, timeout=300)
    installed = subprocess.run([str(own / "bin" / "python"), "-m", "pip", "install", "--no-build-isolation",
                                "--no-index", "--no-deps", "src/python"], cwd=SOURCE_DIR, capture_output=True,
                               text=True, env={**env, "LATENTLIFT_BUILD_DIR": BUILD_DIR}, timeout=300)
    assert installed.returncode == 0, installed.stdout + installed.stderr
    port = free_port()
    address = f"tcp://127.0.0.1:{port}"
    quiet = {"stdout": subprocess.DEVNULL, "stderr": subprocess.DEVNULL, "env": env, "cwd": str(tmp_path)}
    processes = [subprocess.Popen([ENV_PYTHON, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                                   "--port", str(port), "--no-dashboard"], **quiet)]
    try:
        time.sleep(1)
        for python in (ENV_PYTHON, str(own / "bin" / "python")):
            processes.append(subprocess.Popen([python, "-m", "distributed.cli.dask_worker", address, "--nthreads", "2",
                                               "--no-dashboard"], **quiet))
        with distributed.Client(address, timeout=120) as client:
            client.wait_for_workers(2, timeout=120)
            where = client.run(lambda: os.path.dirname(latentlift.__file__))
            assert sorted(os.path.commonpath([p, str(own)]) == str(own) for p in where.values()) == [False, True]
            path = SAMPLE_GRIDS["lambert"]
            with xr.open_dataset(path, chunks={"time": 1, "y": 33}) as ds:
                result = latentlift.analyze(ds, threads=1).compute()
        assert_same_output(result, cli_output(path), qc=False)
    finally:
        for process in reversed(processes):
            process.terminate()
        for process in processes:
            try:
                process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                process.kill()
