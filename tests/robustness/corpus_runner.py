"""Runs latentlift on the damaged-input corpus (make_corpus.py) and judges each run.

A run passes when: it is not ended by a signal and does not hang; it exits with a code the
case allows (0 or 2; 1 is for faults of the machine, never of an input); it leaves nothing
behind but its complete outputs (nothing at all on failure, no temporary file); an exit 0
analysed something; an exit 2 names an input file in one short line.

Also a command-line report: /usr/bin/python3 tests/robustness/corpus_runner.py CORPUS_DIR
(after make_corpus.py) prints every failing run, grouped by kind and problem.
"""
import concurrent.futures
import json
import os
import shutil
import subprocess
import sys
import tempfile

import netCDF4
import numpy as np

TIMEOUT_S = float(os.environ.get("LATENTLIFT_CORPUS_TIMEOUT", "60"))
MAX_MESSAGE_CHARS = 600  # "one clear line": a long attribute value must be cut short
COMMANDS = {"model": ("analyze", "column", "climatology"), "analysis": ("reproject", "quicklook", "climatology")}
SPLIT_COMMANDS = ("analyze", "column")  # fields split over files: climatology takes one file per time step set


def binary():
    return os.environ.get("LATENTLIFT_BINARY", os.path.join(os.path.dirname(__file__), "..", "..", "build", "latentlift"))


def arguments(command, case, out):
    inputs = case["inputs"]
    if command == "analyze":
        return ["analyze"] + inputs + ["-o", os.path.join(out, "out.nc"), "--quiet", "--threads", "1"], ["out.nc"]
    if command == "column":
        return ["column"] + inputs + ["--lat", repr(case["lat"]), "--lon", repr(case["lon"]), "--format", "csv"], []
    if command == "climatology":
        return ["climatology"] + inputs + ["-o", os.path.join(out, "stats.nc"), "--quiet", "--threads", "1"], ["stats.nc"]
    if command == "reproject":
        return ["reproject", inputs[0], "-o", os.path.join(out, "map.nc"), "--resolution", "2", "--quiet"], ["map.nc"]
    if command == "quicklook":
        field = "latent_class" if "class" in case["kind"] else "mu_cape"
        return (["quicklook", inputs[0], "--field", field, "-o", os.path.join(out, "map.png"), "--quiet"],
                ["map.png", "map.pgw", "map.prj", "map.png.aux.xml"])
    raise ValueError(command)


def commands_of(case):
    commands = COMMANDS[case["role"]]
    if len(case["inputs"]) > 1:
        commands = [c for c in commands if c in SPLIT_COMMANDS]
    return commands


def analysed_something(command, out, stdout):
    """For an exit 0: did the run analyse at least one column? (None: not judged here.)"""
    if command == "analyze":
        with netCDF4.Dataset(os.path.join(out, "out.nc")) as nc:
            return int(nc.getncattr("qc_columns_analysed")) > 0
    if command == "climatology":
        with netCDF4.Dataset(os.path.join(out, "stats.nc")) as nc:
            return "count" in nc.variables and int(np.asarray(nc["count"][...]).sum()) > 0
    if command == "column":  # CSV: the class of an analysed column is never empty
        classes = [line.split(",")[1] for line in stdout.splitlines() if line.startswith("latent_class,")]
        return bool(classes) and classes[0] != ""
    return None


def run_case(case, command, work_root):
    """Run one command on one case; returns (problem or None, detail)."""
    out = tempfile.mkdtemp(prefix=command + "-", dir=work_root)
    args, allowed = arguments(command, case, out)
    before_inputs = {f for f in os.listdir(os.path.dirname(case["inputs"][0]))}
    try:
        run = subprocess.run([binary()] + args, capture_output=True, text=True, errors="replace", timeout=TIMEOUT_S,
                             stdin=subprocess.DEVNULL)
    except subprocess.TimeoutExpired:
        shutil.rmtree(out, ignore_errors=True)
        return "hang", f"no exit within {TIMEOUT_S:.0f} s"
    try:
        message = run.stderr.strip()
        first = message.splitlines()[0][:300] if message else ""
        if run.returncode < 0:
            return "signal", f"killed by signal {-run.returncode}: {first}"
        if "ERROR: AddressSanitizer" in run.stderr or "runtime error:" in run.stderr:
            return "sanitizer", message[-2000:]
        left = sorted(os.listdir(out))
        left_inputs = sorted({f for f in os.listdir(os.path.dirname(case["inputs"][0]))} - before_inputs)
        if run.returncode not in case["expect"]:
            if run.returncode == 1:
                return "exit 1", first
            if run.returncode == 0:
                return "exit 0 for an input that must be refused", run.stdout.strip().splitlines()[-1:] and \
                    run.stdout.strip().splitlines()[-1][:300] or "(no output)"
            return f"exit {run.returncode}", first
        if left_inputs:
            return "file left beside the input", " ".join(left_inputs)
        if run.returncode != 0 and left:
            return "file left behind", " ".join(left)
        if run.returncode == 0:
            extra = [f for f in left if f not in allowed]
            if extra:
                return "file left behind", " ".join(extra)
            if allowed and allowed[0] not in left:
                return "exit 0 without its output", ""
            try:
                if analysed_something(command, out, run.stdout) is False:
                    return "exit 0 with nothing analysed", run.stdout.strip()[-300:]
            except (OSError, KeyError, AttributeError) as error:
                return "exit 0 with an unreadable output", str(error)
        if run.returncode == 2:
            names = [os.path.basename(p) for p in case["inputs"]]
            if not any(name in message for name in names):
                return "message does not name the input file", first
            lines = [line for line in message.splitlines() if line.strip()]
            if len(lines) > 1 or len(message) > MAX_MESSAGE_CHARS:
                return "message is not one short line", f"{len(lines)} lines, {len(message)} chars: {first}"
        return None, ""
    finally:
        shutil.rmtree(out, ignore_errors=True)


def run_cases(cases, work_root, jobs=None):
    """[(case, command, problem, detail)] for every run, in the order of cases."""
    jobs = jobs or os.cpu_count() or 2
    runs = [(case, command) for case in cases for command in commands_of(case)]
    with concurrent.futures.ThreadPoolExecutor(max_workers=jobs) as pool:
        results = list(pool.map(lambda r: run_case(r[0], r[1], work_root), runs))
    return [(case, command, problem, detail) for (case, command), (problem, detail) in zip(runs, results)]


def main():
    corpus = sys.argv[1]
    with open(os.path.join(corpus, "manifest.json")) as f:
        cases = json.load(f)
    work = tempfile.mkdtemp(prefix="corpus-runs-")
    results = run_cases(cases, work)
    shutil.rmtree(work, ignore_errors=True)
    failures = {}
    for case, command, problem, detail in results:
        if problem:
            failures.setdefault((case["kind"], command, problem), []).append(
                (os.path.basename(case["inputs"][0]), detail))
    for (kind, command, problem), items in sorted(failures.items()):
        print(f"{kind} / {command}: {problem} ({len(items)}x), e.g. {items[0][0]}: {items[0][1]}")
    print(f"corpus_runner: {len(results)} runs, {sum(1 for r in results if r[2])} failing")


if __name__ == "__main__":
    main()
