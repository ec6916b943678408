"""Every script in scripts/ answers --help (and -h) with its usage, exit 0, and no side effects:
nothing is written to the working folder or the source tree, nothing is built or installed
(a script that started building would also run past the timeout)."""
import os
import subprocess

import pytest

SOURCE_DIR = os.environ.get("LATENTLIFT_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
SCRIPTS = sorted(
    name for name in os.listdir(os.path.join(SOURCE_DIR, "scripts"))
    if name.endswith((".sh", ".py")))


def tree_listing(root):
    """Every path under root except build folders (other tests write there meanwhile)."""
    found = set()
    for folder, subfolders, files in os.walk(root):
        subfolders[:] = [d for d in subfolders if not d.startswith(("build", ".git"))]
        found.update(os.path.join(folder, f) for f in files)
    return found


def command_of(script):
    path = os.path.join(SOURCE_DIR, "scripts", script)
    return ["/usr/bin/python3", path] if script.endswith(".py") else ["bash", path]


def test_every_script_is_covered():
    assert {"setup.sh", "test.sh", "make_bench_grid.py"} <= set(SCRIPTS)


@pytest.mark.parametrize("option", ["--help", "-h"])
@pytest.mark.parametrize("script", SCRIPTS)
def test_script_answers_help_without_side_effects(script, option, tmp_path):
    before = tree_listing(SOURCE_DIR)
    run = subprocess.run(command_of(script) + [option], cwd=tmp_path, capture_output=True, text=True, timeout=20)
    assert run.returncode == 0, run.stderr
    assert "usage" in run.stdout.lower(), run.stdout
    assert list(tmp_path.iterdir()) == [], "files written to the working folder"
    assert tree_listing(SOURCE_DIR) == before, "files written to the source tree"
