"""Flags from one element's reading sequence (store/forecast/anomaly.py).

The sequences are synthetic: a loading curve rising to the change limit along a 3rd-order curve
(REFERENCES.md §7a: ΔP against element life is roughly a 3rd-order curve), read at irregular
intervals with seeded noise, then broken on purpose.
"""

import numpy as np
import pytest

from store.forecast.anomaly import (
    ReadingsOrderError,
    age_ordered,
    drop_without_change,
    gauge_step_bar,
    noise_bar,
    step_up,
)

CLEAN, LIMIT, LIFE = 0.3, 2.0, 1000.0  # bar, bar, h


def curve(t):
    return CLEAN + (LIMIT - CLEAN) * (np.asarray(t) / LIFE) ** 3


def log(seed=0, n=30, noise=0.02, end=0.98):
    """Readings at irregular intervals (each 0.5-1.5 times the mean) with normal noise."""
    rng = np.random.default_rng(seed)
    steps = rng.uniform(0.5, 1.5, n)
    t = np.cumsum(steps) / steps.sum() * end * LIFE
    return t, curve(t) + rng.normal(0.0, noise, n)


def pairs(t, y):
    return list(zip(t.tolist(), y.tolist(), strict=True))


@pytest.mark.parametrize("seed", range(6))
def test_a_normal_loading_curve_raises_no_flag(seed):
    # Every prefix, as the app checks after each saved reading, up to the steep end of life.
    t, y = log(seed)
    for k in range(2, t.size + 1):
        seq = pairs(t[:k], y[:k])
        assert drop_without_change(seq) is None, k
        assert step_up(seq) is None, k


@pytest.mark.parametrize("seed", range(5))
def test_collapsed_element_is_an_urgent_drop(seed):
    t, y = log(seed)
    i = int(np.argmax(t > 0.7 * LIFE))
    # The element collapses: ΔP falls back to the housing's own loss, below the clean element's.
    y_broken = y.copy()
    y_broken[i] = 0.2
    flag = drop_without_change(pairs(t[: i + 1], y_broken[: i + 1]))
    assert flag is not None and flag.kind == "drop" and flag.urgent
    assert flag.dp_bar == pytest.approx(0.2)
    assert flag.expected_bar == pytest.approx(float(np.median(y[i - 3 : i])), rel=0.15)
    assert "without an element change" in flag.reason


def test_a_reading_within_noise_below_the_last_is_no_drop():
    t, y = log(2)
    seq = pairs(t[:20], y[:20])
    seq[-1] = (seq[-1][0], seq[-2][1] - 0.02)  # one noise width below the reading before
    assert drop_without_change(seq) is None


def test_contamination_step_is_flagged():
    # A dirt load after a repair: at 40 % of life ΔP jumps by 0.5 bar at one reading and stays
    # up. With 0.02 bar noise, demand it be caught in at least 8 of 10 logs.
    caught = 0
    for seed in range(10):
        t, y = log(seed)
        i = int(np.argmax(t > 0.4 * LIFE))
        y_step = y.copy()
        y_step[i:] += 0.5
        flag = step_up(pairs(t[: i + 1], y_step[: i + 1]))
        if flag is not None:
            caught += 1
            assert flag.kind == "step-up" and not flag.urgent
            assert flag.expected_bar == pytest.approx(float(curve(t[i])), abs=0.06)
        # The reading before the jump raised nothing.
        assert step_up(pairs(t[:i], y_step[:i])) is None
    assert caught >= 8


def test_gauge_step_readings():
    # Readings written to a 0.05 bar gauge step: one step down is rounding, not a torn element.
    t = np.linspace(50.0, 600.0, 12)
    y = np.round(curve(t) / 0.05) * 0.05
    assert gauge_step_bar(y) == pytest.approx(0.05)
    assert noise_bar(y) >= 0.05 / np.sqrt(12)
    seq = pairs(t, y)
    seq.append((650.0, y[-1] - 0.05))
    assert drop_without_change(seq) is None


def test_too_short_sequences_raise_nothing():
    assert drop_without_change([(1.0, 0.5), (2.0, 0.1)]) is None
    assert step_up([(1.0, 0.3), (2.0, 0.3), (3.0, 1.5)]) is None


def test_unsorted_readings_are_refused():
    with pytest.raises(ReadingsOrderError):
        drop_without_change([(5.0, 0.3), (1.0, 0.3), (7.0, 0.3), (9.0, 0.3)])
    with pytest.raises(ValueError):
        step_up([(1.0, 0.3), (2.0, float("nan"))])


def real_logs(names=("01", "07", "33", "40")):
    """Technician logs of real run-to-failure clogging runs (PHME 2020 data challenge,
    ../shared/data/phme20, SOURCE.md): read there, never copied into the project."""
    from tests.benchmarks.clogging import data_dir, load_runs, technician_log

    folder = data_dir()
    if not (folder / "runs.csv").is_file():
        pytest.skip(f"clogging data not found at {folder}")
    return [technician_log(run, seed=1) for run in load_runs(folder, names=names)]


def test_real_loading_curves_raise_no_drop_and_a_halved_reading_does():
    for ages, dps in real_logs():
        for k in range(2, ages.size + 1):  # every prefix, as after each saved reading
            assert drop_without_change(pairs(ages[:k], dps[:k])) is None, k
        # Once ΔP is well clear of the gauge's resolution (past a quarter of the 20 psi
        # clogging rule, SOURCE.md) the element tears: the next reading is half the last.
        i = int(np.argmax(dps > 0.25 * 20 * 0.0689476))  # psi to bar, NIST SP 811
        seq = pairs(ages[: i + 1], dps[: i + 1]) + [(float(ages[i + 1]), float(dps[i]) / 2)]
        flag = drop_without_change(seq)
        assert flag is not None and flag.urgent, (ages[i], dps[i])


def test_a_drop_logged_at_the_same_age_as_the_reading_before_is_still_the_newest():
    # Two readings in the same minute (one element age): the one logged last is the newest,
    # whatever its value. Sorted by value as well as age, 1.25 came before 2.5 and hid.
    t, y = log(0)
    i = int(np.argmax(t > 0.7 * LIFE))
    seq = pairs(t[:i], y[:i]) + [(float(t[i]), 2.5), (float(t[i]), 1.25)]
    assert age_ordered(seq)[-1] == (float(t[i]), 1.25)
    flag = drop_without_change(age_ordered(seq))
    assert flag is not None and flag.dp_bar == pytest.approx(1.25)


def test_a_step_up_never_names_a_level_below_the_reading_before():
    # Issue 24: the note said the trend expected "about -0.05 bar". Readings falling slowly
    # (new element bedding in; invented values), then a long gap and a jump: the fitted line
    # runs below zero by then.
    seq = [(10.0 * i, 0.3 - 0.03 * i + 0.002 * (i % 2)) for i in range(1, 7)] + [(360.0, 0.9)]
    flag = step_up(seq)
    assert flag is not None and flag.kind == "step-up"
    assert flag.expected_bar >= seq[-2][1] - 1e-12
    assert "about -" not in flag.reason and "bar -" not in flag.reason
    assert f"from {seq[-2][1]:.3g} bar" in flag.reason
