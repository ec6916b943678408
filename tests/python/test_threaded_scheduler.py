"""latentlift.analyze on Dask's default threaded scheduler, in several chunks, computed again
and again: blocks are analysed in memory beside Dask tasks reading the input through xarray,
without deadlock and with the command line's results."""

import os
import subprocess
import sys

from conftest import SAMPLE_GRIDS, run_cli

# Generous: 20 computes take a few seconds alone; the 2-core machine may be shared. A deadlock
# hangs forever, so any finite limit tells it apart.
TIMEOUT_S = 300


def test_twenty_threaded_computes_in_six_chunks_give_the_command_line_output(tmp_path):
    path = SAMPLE_GRIDS["lambert"]
    expected = tmp_path / "cli.nc"
    code, _, err = run_cli("analyze", path, "-o", expected, "--quiet")
    assert code == 0, err
    helper = os.path.join(os.path.dirname(__file__), "threaded_computes.py")
    try:
        done = subprocess.run([sys.executable, helper, path, str(expected), "20"], capture_output=True, text=True,
                              timeout=TIMEOUT_S, cwd=os.path.dirname(__file__))
    except subprocess.TimeoutExpired:
        raise AssertionError(f"20 threaded computes did not finish in {TIMEOUT_S} s (deadlock?)") from None
    assert done.returncode == 0, done.stdout + done.stderr
    assert "computed 20 times" in done.stdout
