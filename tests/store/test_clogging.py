"""The forecast on real clogging runs (open PHME 2020 data challenge data, SOURCE.md beside it).

A small subset of the benchmark in tests/benchmarks/clogging.py: six runs, one from each test
condition of the rig, each forecast with the other five as its position's history.
"""

import math

import pytest

from store.forecast.trend_calibration import SHIPPED
from tests.benchmarks.clogging import (
    Fold,
    book_agreement,
    conditions,
    data_dir,
    derive_calibration,
    evaluate,
    grouped_folds,
    load_runs,
    score,
)

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


def _data_or_skip():
    folder = data_dir()
    if not (folder / "runs.csv").is_file():
        pytest.skip(f"clogging data not found at {folder} (set SUMPBOOK_CLOGGING_DATA)")
    return folder


def test_the_book_path_gives_the_functions_date():
    """One held-out run of one condition, at 70 % of its life: logged through the book
    (import of the shift log, status --json --as-of) it gets the function's likely date."""
    folder = _data_or_skip()
    runs = load_runs(folder)
    fold = grouped_folds(runs, conditions(folder))[0]
    one = Fold(fold.label, fold.held[:1], fold.history)
    [(name, frac, function_h, book_h)] = book_agreement([one], fractions=(0.7,))
    assert name == fold.held[0].name and frac == 0.7
    assert len(fold.history) == 20
    # dates in the JSON are whole seconds: 1 s in ~250 h is 1e-6
    assert book_h == pytest.approx(function_h, rel=1e-5)


def test_the_shipped_calibration_is_what_the_runs_give():
    """SHIPPED in store/forecast/trend_calibration.py, derived again from the 24 runs (its provenance)."""
    folder = _data_or_skip()
    cal = derive_calibration(load_runs(folder), conditions(folder))
    assert cal.n == SHIPPED.n
    for got, shipped in (
        (cal.earliest, SHIPPED.earliest),
        (cal.likely, SHIPPED.likely),
        (cal.latest, SHIPPED.latest),
    ):
        assert got == pytest.approx(shipped, abs=6e-4)  # printed to 3 decimals
