"""The damaged-input corpus (make_corpus.py, seeded) through analyze, column, climatology,
reproject and quicklook: no death by signal, no hang, exit 0 or 2 as the kind allows (never 1:
nothing here is the machine's fault), nothing left behind, no exit 0 with nothing analysed, an
exit 2 naming the input in one short line (corpus_runner.py judges each run).

One test per kind of damage. Kinds in PENDING would be generated but not asserted, each with
the fix it waits for; PENDING is empty: every kind is asserted."""
import json
import os
import subprocess
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import corpus_runner  # noqa: E402
import make_corpus  # noqa: E402

SEED = int(os.environ.get("LATENTLIFT_CORPUS_SEED", "8"))

# Every kind make_corpus.py makes (a new kind must be added here, asserted or pending).
KINDS = [
    "clean", "byte_flip", "truncated", "zeroed_block", "not_netcdf",
    "units_kelvin_as_celsius", "units_temperature_unknown", "units_temperature_long", "units_rh_percent_as_fraction",
    "units_q_as_percent", "units_pressure_mislabelled", "units_height_mislabelled",
    "packing_bad_scale", "packing_bad_attribute", "fill_bad_attribute", "fill_missing_value_list", "packed_int16", "int8_temperature", "all_fill",
    "data_nan", "data_inf", "data_zero", "data_negative", "data_zero_humidity", "data_one_inf", "data_one_nan",
    "surface_pressure_bad", "levels_absurd", "levels_equal", "levels_duplicate", "levels_permuted", "levels_string",
    "levels_too_few", "latitude_out_of_range", "dimension_zero", "dimension_huge", "two_candidates",
    "split_files", "split_files_mismatched",
    "analysis_clean", "analysis_byte_flip", "analysis_truncated", "analysis_zeroed_block", "analysis_class_undeclared",
    "analysis_inf", "analysis_bad_packing", "analysis_bad_grid_mapping", "analysis_dimension_zero",
    "analysis_latitude_out_of_range",
]

# Kinds generated but not yet asserted, each with the fix it waits for. Empty: every kind is
# asserted (issue 8). A kind added here needs a precise reason.
PENDING = {}



@pytest.fixture(scope="session")
def corpus(tmp_path_factory):
    """The corpus: base cuts of the sample grids, their analyze outputs, then the damaged files."""
    root = tmp_path_factory.mktemp("corpus")
    bases = str(root / "bases")
    subprocess.run([sys.executable, make_corpus.__file__, bases, "--write-bases"], check=True)
    analyses = []
    for name in ("aurel", "coast"):
        out = os.path.join(bases, f"analysis-{name}.nc")
        done = subprocess.run([corpus_runner.binary(), "analyze", os.path.join(bases, f"base-{name}.nc"), "-o", out,
                               "--quiet"], capture_output=True, text=True)
        assert done.returncode == 0, done.stderr
        analyses.append(out)
    cases_dir = str(root / "cases")
    subprocess.run([sys.executable, make_corpus.__file__, cases_dir, "--seed", str(SEED), "--analysis"] + analyses,
                   check=True, capture_output=True)
    with open(os.path.join(cases_dir, "manifest.json")) as f:
        cases = json.load(f)
    work = root / "runs"
    work.mkdir()
    return cases, str(work)


def test_corpus_has_several_hundred_cases_of_known_kinds(corpus):
    cases, _ = corpus
    assert len(cases) >= 300
    assert {c["kind"] for c in cases} == set(KINDS)
    assert set(PENDING) <= set(KINDS)


@pytest.mark.parametrize("kind", [k for k in KINDS if k not in PENDING])
def test_damage_kind(kind, corpus):
    cases, work = corpus
    selected = [c for c in cases if c["kind"] == kind]
    assert selected
    results = corpus_runner.run_cases(selected, work)
    failures = [f"{os.path.basename(case['inputs'][0])} {command}: {problem}: {detail}"
                for case, command, problem, detail in results if problem]
    assert not failures, f"{len(failures)} of {len(results)} runs failed:\n" + "\n".join(failures[:20])
