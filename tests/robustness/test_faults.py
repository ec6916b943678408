"""Faults of the machine and of the surroundings, for every writer (analyze, climatology,
reproject to NetCDF and to a Cloud-Optimized GeoTIFF, quicklook): a full disk, two runs writing one output, signals in the middle of a
run (with and without --overwrite, and SIGHUP under nohup), a dangling symbolic link and a
directory as the output. The rules checked are the README's "Outputs" section: an output
appears complete or not at all, nothing temporary is left, exit 2 for the user's mistakes
and 1 for the machine's."""
import os
import shutil
import signal
import subprocess
import time

import pytest

SOURCE_DIR = os.environ.get("LATENTLIFT_SOURCE_DIR", os.path.join(os.path.dirname(__file__), "..", ".."))
BINARY = os.environ.get("LATENTLIFT_BINARY", os.path.join(SOURCE_DIR, "build", "latentlift"))
COAST = os.path.join(SOURCE_DIR, "sample_grids", "vessaline_coast_lcc.nc")
REAL_GRIB = os.path.join(SOURCE_DIR, "..", "shared", "real-data", "ncep-nwp-pressure-levels",
                         "gfs_2p5deg_20110110_12z_f120.grib2")
TIMEOUT_S = 300
WRITERS = ("analyze", "climatology", "reproject", "cog", "quicklook")
NO_SPACE = "No space left on device"  # strerror(ENOSPC), glibc


def run(args, **kwargs):
    return subprocess.run([BINARY] + args, capture_output=True, text=True, timeout=TIMEOUT_S,
                          stdin=subprocess.DEVNULL, **kwargs)


@pytest.fixture(scope="module")
def analysis(tmp_path_factory):
    """An analyze output of the Vessaline Coast grid (input of reproject and quicklook)."""
    path = str(tmp_path_factory.mktemp("analysis") / "coast.nc")
    done = run(["analyze", COAST, "-o", path, "--quiet"])
    assert done.returncode == 0, done.stderr
    return path


def writer_args(writer, target, analysis, overwrite=False):
    """The command line of one writer writing target."""
    if writer == "analyze":
        args = ["analyze", COAST, "-o", target, "--quiet", "--level-fields"]
    elif writer == "climatology":
        args = ["climatology", COAST, "-o", target, "--quiet"]
    elif writer == "reproject":
        args = ["reproject", analysis, "-o", target, "--resolution", "0.05", "--quiet"]
    elif writer == "cog":
        args = ["reproject", analysis, "-o", target, "--format", "cog", "--field", "mu_cape", "--resolution", "0.05",
                "--quiet"]
    else:
        args = ["quicklook", analysis, "--field", "mu_cape", "-o", target, "--quiet"]
    if overwrite:
        args.append("--update" if writer == "climatology" else "--overwrite")
    return args


def leftovers(folder, keep=()):
    """Files in folder other than keep (temporary files included)."""
    return sorted(f for f in os.listdir(folder) if f not in keep)


def target_name(writer):
    return {"quicklook": "map.png", "cog": "map.tif"}.get(writer, "out.nc")


# ----------------------------------------------------------------------------- disk full
@pytest.fixture
def small_disk(tmp_path):
    """A 96 KiB tmpfs (too small for any of the outputs); needs root."""
    if os.geteuid() != 0:
        pytest.skip("disk-full tests mount a small tmpfs and need root (CI runs as root)")
    mount_point = tmp_path / "small_disk"
    mount_point.mkdir()
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=96k", "tmpfs", str(mount_point)],
                             capture_output=True, text=True)
    if mounted.returncode != 0:
        pytest.skip("cannot mount a tmpfs here: " + mounted.stderr.strip())
    # Leave 8 KiB free (a filler in a folder of its own): every output is larger than that.
    filler = mount_point / "filler"
    filler.mkdir()
    free = os.statvfs(mount_point).f_bavail * os.statvfs(mount_point).f_frsize
    with open(filler / "data", "wb") as f:
        f.write(bytes(free - 8192))
    yield str(mount_point)
    subprocess.run(["umount", "-l", str(mount_point)], check=False)


@pytest.mark.parametrize("writer", WRITERS)
def test_disk_full_is_exit_1_without_crash_or_leftovers(writer, analysis, small_disk):
    target = os.path.join(small_disk, target_name(writer))
    if writer == "reproject":  # a fine grid, so that the output does not fit
        args = ["reproject", analysis, "-o", target, "--resolution", "0.02", "--quiet"]
    else:
        args = writer_args(writer, target, analysis)
    done = run(args)
    assert done.returncode == 1, f"exit {done.returncode}: {done.stderr[-2000:]}"
    assert leftovers(small_disk) == ["filler"]
    message = [line for line in done.stderr.splitlines() if line.startswith("latentlift:")]
    assert len(message) == 1, done.stderr[-2000:]
    assert target in message[0] and ".tmp-" not in message[0]
    assert NO_SPACE.lower() in message[0].lower(), message[0]
    assert done.stderr.strip() == message[0], "more than the one line: " + done.stderr[-2000:]


# ----------------------------------------------------------------------------- runs that overlap
def start_when_staged(args, folder, name):
    """Start a writer and wait until its temporary file exists (the run is past its start checks)."""
    process = subprocess.Popen([BINARY] + args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               stdin=subprocess.DEVNULL)
    temporary = os.path.join(folder, f"{name}.tmp-{process.pid}")
    deadline = time.monotonic() + 60
    while not os.path.exists(temporary) and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.005)
    return process, temporary


def slow_analyze(target, overwrite=False):
    """An analyze run that takes a while (level fields, one thread)."""
    args = ["analyze", COAST, "-o", target, "--quiet", "--level-fields", "--threads", "1"]
    return args + (["--overwrite"] if overwrite else [])


def test_two_concurrent_runs_without_overwrite_exactly_one_wins(tmp_path):
    target = str(tmp_path / "out.nc")
    first, first_tmp = start_when_staged(slow_analyze(target), str(tmp_path), "out.nc")
    second, second_tmp = start_when_staged(slow_analyze(target), str(tmp_path), "out.nc")
    assert first.poll() is None and second.poll() is None, "a run ended before both had started"
    results = [p.communicate(timeout=TIMEOUT_S) + (p.returncode,) for p in (first, second)]
    codes = sorted(r[2] for r in results)
    assert codes == [0, 2], results
    loser = next(r for r in results if r[2] == 2)
    assert "appeared while this run was writing it" in loser[1] and target in loser[1]
    assert leftovers(str(tmp_path)) == ["out.nc"]
    check = run(["quicklook", target, "--field", "mu_cape", "-o", str(tmp_path / "check.png"), "--quiet"])
    assert check.returncode == 0, check.stderr  # the winner's file is complete


def test_two_concurrent_runs_with_overwrite_both_succeed(tmp_path):
    target = str(tmp_path / "out.nc")
    first, _ = start_when_staged(slow_analyze(target, True), str(tmp_path), "out.nc")
    second, _ = start_when_staged(slow_analyze(target, True), str(tmp_path), "out.nc")
    for p in (first, second):
        _, err = p.communicate(timeout=TIMEOUT_S)
        assert p.returncode == 0, err
    assert leftovers(str(tmp_path)) == ["out.nc"]


# ----------------------------------------------------------------------------- signals
@pytest.mark.parametrize("overwrite", [False, True], ids=["new", "overwrite"])
@pytest.mark.parametrize("signal_number", [signal.SIGINT, signal.SIGTERM, signal.SIGHUP], ids=["INT", "TERM", "HUP"])
def test_signal_mid_run_removes_the_temporary_and_keeps_the_old_output(tmp_path, signal_number, overwrite):
    target = str(tmp_path / "out.nc")
    old = b"the output of an earlier run"
    if overwrite:
        with open(target, "wb") as f:
            f.write(old)
    process, temporary = start_when_staged(slow_analyze(target, overwrite), str(tmp_path), "out.nc")
    assert process.poll() is None, "the run ended before the signal"
    process.send_signal(signal_number)
    process.communicate(timeout=TIMEOUT_S)
    assert process.returncode == -signal_number  # the signal is passed on: the caller sees it
    assert not os.path.exists(temporary)
    if overwrite:
        with open(target, "rb") as f:
            assert f.read() == old
        assert leftovers(str(tmp_path)) == ["out.nc"]
    else:
        assert leftovers(str(tmp_path)) == []


def stopped_when_staged(args, folder, name, env=None):
    """Start a writer, wait until its temporary file exists and stop it there (SIGSTOP), so a
    short writing phase (GDAL's COG copy) is caught for sure; the caller sends SIGCONT."""
    process = subprocess.Popen([BINARY] + args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               stdin=subprocess.DEVNULL, env=env)
    temporary = os.path.join(folder, name.replace("{pid}", str(process.pid)))
    deadline = time.monotonic() + 120
    while not os.path.exists(temporary) and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.0002)  # the COG is written out in a few milliseconds
    process.send_signal(signal.SIGSTOP)
    return process, temporary


def cog_args(analysis, target, overwrite=False):
    """A COG run whose writing phase is long enough to be caught (a fine grid)."""
    return (["reproject", analysis, "-o", target, "--format", "cog", "--field", "mu_cape", "--resolution", "0.02",
             "--quiet"] + (["--overwrite"] if overwrite else []))


@pytest.mark.parametrize("signal_number", [signal.SIGINT, signal.SIGTERM], ids=["INT", "TERM"])
def test_signal_while_writing_a_cog_removes_the_temporary(tmp_path, analysis, signal_number):
    target = str(tmp_path / "map.tif")
    process, temporary = stopped_when_staged(cog_args(analysis, target), str(tmp_path), "map.tif.tmp-{pid}")
    assert process.poll() is None and os.path.exists(temporary), "the run ended before it was stopped"
    process.send_signal(signal_number)
    process.send_signal(signal.SIGCONT)
    process.communicate(timeout=TIMEOUT_S)
    assert process.returncode == -signal_number
    assert leftovers(str(tmp_path)) == []


def test_two_concurrent_cog_runs_without_overwrite_exactly_one_wins(tmp_path, analysis):
    target = str(tmp_path / "map.tif")
    first, _ = stopped_when_staged(cog_args(analysis, target), str(tmp_path), "map.tif.tmp-{pid}")
    assert first.poll() is None, "the first run ended before it was stopped"
    second = run(cog_args(analysis, target))  # runs to the end while the first is held
    assert second.returncode == 0, second.stderr
    first.send_signal(signal.SIGCONT)
    _, err = first.communicate(timeout=TIMEOUT_S)
    assert first.returncode == 2, err
    assert "appeared while this run was writing it" in err and target in err
    assert leftovers(str(tmp_path)) == ["map.tif"]
    info = subprocess.run(["gdalinfo", target], capture_output=True, text=True)
    assert info.returncode == 0 and "LAYOUT=COG" in info.stdout, info.stdout + info.stderr  # the winner's file


@pytest.mark.skipif(not os.path.exists(REAL_GRIB), reason="the real GFS GRIB sample (../shared/real-data) is not here")
@pytest.mark.parametrize("signal_number", [signal.SIGINT, signal.SIGTERM, signal.SIGHUP], ids=["INT", "TERM", "HUP"])
def test_signal_mid_run_on_grib_input_leaves_no_staged_file(tmp_path, signal_number):
    staging = tmp_path / "staging"  # TMPDIR: where GRIB input is staged as NetCDF
    staging.mkdir()
    env = dict(os.environ, TMPDIR=str(staging))
    target = str(tmp_path / "out.nc")
    process, staged = stopped_when_staged(["analyze", REAL_GRIB, "-o", target, "--quiet", "--threads", "1"],
                                          str(staging), "latentlift-grib-{pid}-0.nc", env=env)
    assert process.poll() is None and os.path.exists(staged), "the run ended before it was stopped"
    process.send_signal(signal_number)
    process.send_signal(signal.SIGCONT)
    process.communicate(timeout=TIMEOUT_S)
    assert process.returncode == -signal_number
    assert os.listdir(staging) == [] and leftovers(str(tmp_path)) == ["staging"]


def test_sighup_under_nohup_is_ignored_and_the_run_completes(tmp_path):
    target = str(tmp_path / "out.nc")
    process = subprocess.Popen(["nohup", BINARY] + slow_analyze(target), stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True, stdin=subprocess.DEVNULL, cwd=tmp_path)
    deadline = time.monotonic() + 60
    staged = lambda: [f for f in os.listdir(tmp_path) if f.startswith("out.nc.tmp-")]
    while not staged() and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.005)
    assert process.poll() is None, "the run ended before the signal"
    process.send_signal(signal.SIGHUP)  # nohup execs latentlift: same process
    _, err = process.communicate(timeout=TIMEOUT_S)
    assert process.returncode == 0, err
    assert sorted(f for f in os.listdir(tmp_path) if f != "nohup.out") == ["out.nc"]


# ----------------------------------------------------------------------------- targets
@pytest.mark.parametrize("writer", WRITERS)
def test_dangling_symlink_is_an_existing_target(writer, analysis, tmp_path):
    target = str(tmp_path / target_name(writer))
    os.symlink(str(tmp_path / "nowhere"), target)
    done = run(writer_args(writer, target, analysis))
    assert done.returncode == 2, done.stderr
    assert "exists" in done.stderr and target in done.stderr
    assert os.path.islink(target) and not os.path.exists(str(tmp_path / "nowhere"))
    assert leftovers(str(tmp_path)) == [os.path.basename(target)]


@pytest.mark.parametrize("writer", ["analyze", "reproject", "cog", "quicklook"])
def test_dangling_symlink_with_overwrite_is_replaced_by_the_output(writer, analysis, tmp_path):
    target = str(tmp_path / target_name(writer))
    os.symlink(str(tmp_path / "nowhere"), target)
    done = run(writer_args(writer, target, analysis, overwrite=True))
    assert done.returncode == 0, done.stderr
    assert os.path.isfile(target) and not os.path.islink(target)
    assert not os.path.exists(str(tmp_path / "nowhere"))


@pytest.mark.parametrize("overwrite", [False, True], ids=["new", "overwrite"])
@pytest.mark.parametrize("writer", WRITERS)
def test_directory_as_target_is_exit_2_at_start(writer, overwrite, analysis, tmp_path):
    target = tmp_path / "folder.out"
    target.mkdir()
    started = time.monotonic()
    done = run(writer_args(writer, str(target), analysis, overwrite=overwrite and writer != "climatology"))
    assert done.returncode == 2, done.stderr
    assert "is a directory" in done.stderr and str(target) in done.stderr
    assert leftovers(str(tmp_path)) == ["folder.out"] and os.listdir(target) == []
    assert time.monotonic() - started < 20


@pytest.mark.parametrize("writer", WRITERS)
def test_existing_target_is_kept_without_overwrite(writer, analysis, tmp_path):
    target = str(tmp_path / target_name(writer))
    with open(target, "wb") as f:
        f.write(b"keep me")
    done = run(writer_args(writer, target, analysis))
    assert done.returncode == 2, done.stderr
    with open(target, "rb") as f:
        assert f.read() == b"keep me"
    assert leftovers(str(tmp_path)) == [os.path.basename(target)]


def test_quicklook_overwrite_replaces_the_map(analysis, tmp_path):
    target = str(tmp_path / "map.png")
    first = run(writer_args("quicklook", target, analysis))
    assert first.returncode == 0, first.stderr
    again = run(writer_args("quicklook", target, analysis))
    assert again.returncode == 2 and "--overwrite" in again.stderr
    replaced = run(writer_args("quicklook", target, analysis, overwrite=True))
    assert replaced.returncode == 0, replaced.stderr
    assert leftovers(str(tmp_path)) == ["map.png"]
