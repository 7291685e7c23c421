"""The forecast on real clogging runs (open PHME 2020 data challenge data, SOURCE.md beside it).

A small subset of the benchmark in tests/benchmarks/clogging.py: six runs, one from each test
condition of the rig, each forecast with the other five as its position's history.
"""

import math

import pytest

from tests.benchmarks.clogging import data_dir, evaluate, load_runs, score

SUBSET = ("01", "05", "09", "33", "37", "41")


@pytest.fixture(scope="module")
def calls():
    folder = data_dir()
    if not (folder / "runs.csv").is_file():
        pytest.skip(f"clogging data not found at {folder} (set SUMPBOOK_CLOGGING_DATA)")
    runs = load_runs(folder, names=SUBSET)
    assert len(runs) == len(SUBSET)
    return evaluate(runs, fractions=(0.7,))


def test_beats_the_straight_line_through_the_last_readings(calls):
    ours = score(calls, "sumpbook", 0.7)
    line = score(calls, "line, last 3", 0.7)
    assert ours.n == 6
    assert math.isfinite(ours.median_error)
    assert ours.median_error < line.median_error


def test_beats_a_fixed_change_interval(calls):
    ours = score(calls, "sumpbook", 0.7)
    fixed = score(calls, "fixed interval", 0.7)
    assert ours.median_error < fixed.median_error


def test_runs_start_when_the_pump_runs(calls):
    # SOURCE.md: the pump starts within the first 4-12 s of each log.
    for run in load_runs(data_dir(), names=SUBSET):
        assert 4 <= run.start_s <= 12
        assert run.dp_psi[-1] > 20.0  # cut at the first second over 20 psi (SOURCE.md)
