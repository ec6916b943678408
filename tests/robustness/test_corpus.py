"""The damaged-input corpus (make_corpus.py, seeded) through analyze, column, climatology,
reproject and quicklook: no death by signal, no hang, exit 0 or 2 as the kind allows (never 1:
nothing here is the machine's fault), nothing left behind, no exit 0 with nothing analysed, an
exit 2 naming the input in one short line (corpus_runner.py judges each run).

One test per kind of damage. Kinds in PENDING are generated but not yet asserted: each names
the fix it waits for (issue 8); remove a kind from PENDING when its fix lands."""
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
    "packing_bad_scale", "packing_bad_attribute", "fill_bad_attribute", "packed_int16", "int8_temperature", "all_fill",
    "data_nan", "data_inf", "data_zero", "data_negative", "data_zero_humidity", "data_one_inf", "data_one_nan",
    "surface_pressure_bad", "levels_absurd", "levels_equal", "levels_duplicate", "levels_permuted", "levels_string",
    "levels_too_few", "latitude_out_of_range", "dimension_zero", "dimension_huge", "two_candidates",
    "split_files", "split_files_mismatched",
    "analysis_clean", "analysis_byte_flip", "analysis_truncated", "analysis_zeroed_block", "analysis_class_undeclared",
    "analysis_inf", "analysis_bad_packing", "analysis_bad_grid_mapping", "analysis_dimension_zero",
    "analysis_latitude_out_of_range",
]

PLAUSIBILITY = "plausibility at the edge (issue 8 item 1, trust-input)"
PENDING = {
    "byte_flip": "netCDF-C 4.9.0 may loop for minutes in nc_open on a damaged classic header (trust-output)",
    "truncated": "a truncated classic file passes the size check (item 4, trust-input)",
    "units_kelvin_as_celsius": PLAUSIBILITY,
    "units_temperature_long": "long attribute values cut short in messages (item 4, trust-input)",
    "units_rh_percent_as_fraction": PLAUSIBILITY,
    "units_q_as_percent": PLAUSIBILITY,
    "units_pressure_mislabelled": PLAUSIBILITY,
    "units_height_mislabelled": PLAUSIBILITY,
    "packing_bad_scale": PLAUSIBILITY,
    "packing_bad_attribute": PLAUSIBILITY,
    "fill_bad_attribute": PLAUSIBILITY,
    "int8_temperature": PLAUSIBILITY,
    "all_fill": "a run analysing nothing is exit 2 (item 2, trust-input)",
    "data_nan": "a run analysing nothing is exit 2 (item 2, trust-input)",
    "data_inf": PLAUSIBILITY,
    "data_zero": PLAUSIBILITY,
    "data_negative": PLAUSIBILITY,
    "surface_pressure_bad": PLAUSIBILITY,
    "levels_absurd": PLAUSIBILITY,
    "levels_equal": PLAUSIBILITY,
    "levels_duplicate": PLAUSIBILITY,
    "levels_permuted": PLAUSIBILITY,
    "levels_string": "a string pressure coordinate is exit 1 (item 4, trust-input)",
    "levels_too_few": PLAUSIBILITY,
    "latitude_out_of_range": PLAUSIBILITY,
    "dimension_zero": "zero-length dimensions crash (item 3, trust-input)",
    "dimension_huge": "huge dimensions: exit 2 before allocating (item 3, trust-input)",
    "two_candidates": "two candidate variables are exit 2 (item 2, trust-input)",
    "analysis_byte_flip": "reproject crashes on some damaged outputs (item 3, trust-input)",
    "analysis_zeroed_block": "damaged outputs: exit 1 for HDF errors (item 4, trust-input)",
    "analysis_class_undeclared": "class fields only carry their flag_values (item 3, trust-input)",
    "analysis_inf": "inf is missing or an error in map inputs (item 3, trust-input)",
    "analysis_bad_packing": PLAUSIBILITY,
    "analysis_bad_grid_mapping": "climatology accepts an unknown grid mapping (item 3, trust-input)",
    "analysis_dimension_zero": "zero-length dimensions crash (item 3, trust-input)",
    "analysis_latitude_out_of_range": PLAUSIBILITY,
}



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
