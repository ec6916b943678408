"""scripts/setup.sh leaves build/python-env: a venv whose python imports the installed latentlift."""

import os
import subprocess

import pytest

from conftest import SOURCE_DIR

BUILD_DIR = os.path.realpath(os.environ.get("LATENTLIFT_BUILD_DIR", os.path.join(SOURCE_DIR, "build")))
ENV_PYTHON = os.path.join(BUILD_DIR, "python-env", "bin", "python")


@pytest.mark.skipif(not os.path.exists(ENV_PYTHON), reason="no build/python-env: scripts/setup.sh makes it")
def test_python_env_imports_the_pip_installed_module_with_debian_packages():
    script = ("import latentlift, xarray, dask, distributed, numpy, os; "
              "print(os.path.dirname(latentlift.__file__)); print(os.path.dirname(xarray.__file__))")
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    done = subprocess.run([ENV_PYTHON, "-c", script], capture_output=True, text=True, env=env, cwd="/", timeout=120)
    assert done.returncode == 0, done.stderr
    module_dir, xarray_dir = done.stdout.split()
    assert module_dir.startswith(os.path.join(BUILD_DIR, "python-env"))  # installed by pip, not the build tree
    assert xarray_dir.startswith("/usr/lib/python3/dist-packages")     # Debian's python3-xarray
