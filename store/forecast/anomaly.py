"""Flags raised by the sequence of one element's normalised ΔP readings.

An element only loads: its ΔP at reference conditions rises, slowly and then faster. So

- a clear fall without an element change means the element no longer resists the flow as it did:
  torn or collapsed media, a missing element, a seal bypassed or a bypass valve stuck open; urgent.
- a sudden jump far above the element's own trend points to a dirt load: a contamination event
  after a repair, a top-up through no filter, a failing component upstream.

Both look only at the newest reading against the ones before it, so they can run after every
saved reading. Readings are (age_h, dp_bar) pairs, sorted by age, of one element since its change;
`age_ordered` sorts them so that readings of one age (the same minute) stay in the order they were
logged: the newest is the last logged, whatever its value.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from store.base.errors import BookError
from store.forecast.trend import prepare_readings, weighted_quantiles
from store.forecast.trend_models import fit_trend, robust_sd

DROP_NOISE_TIMES = 4.0  # a fall must exceed 4 noise widths...
DROP_MIN_SHARE = 0.15  # ...and 15 % of the level it fell from
STEP_NOISE_TIMES = 5.0  # a jump above the trend's median must exceed 5 noise widths,
STEP_SPREAD_TIMES = 3.0  # ...3 times the trend's own spread there (its 50-90 % width)
STEP_MIN_SHARE = 0.25  # ...and a quarter of the rise the trend expected since clean,
STEP_RATE_TIMES = 4.0  # and ΔP must rise 4 times faster than over any of the 3 intervals before
STEP_MIN_READINGS = 4  # readings before the newest one needed to know the trend
DROP_MIN_READINGS = 3  # readings before the newest one needed to know the level
DROP_TREND_QUANTILE = 0.1  # the trend's level a fall is measured from: its low end


class ReadingsOrderError(BookError):
    """Readings handed to a flag check are not in age order."""


@dataclass(frozen=True)
class Flag:
    """One reading that does not fit the element's history."""

    kind: str  # "drop" or "step-up"
    age_h: float
    dp_bar: float
    expected_bar: float  # the level the reading was judged against
    urgent: bool
    reason: str  # what the readings show, one plain sentence without a final stop
    advice: str  # what to check


def _arrays(readings: Sequence[tuple[float, float]]) -> tuple[np.ndarray, np.ndarray]:
    arr = np.asarray(list(readings), dtype=float).reshape(-1, 2)
    if not np.all(np.isfinite(arr)):
        raise BookError("readings must be finite numbers")
    t, y = arr[:, 0], arr[:, 1]
    if np.any(np.diff(t) < 0):
        raise ReadingsOrderError("readings must be sorted by element age")
    return t, y


def age_ordered(readings: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
    """(age_h, dp_bar) pairs, given in the order they were logged, sorted by age only.

    A stable sort: two readings at one age keep their logging order. Sorting the pairs whole
    put a lower reading before a higher one of the same minute, so a halved reading logged
    right after another hid behind it and raised no ΔP drop.
    """
    return sorted(readings, key=lambda pair: pair[0])


def gauge_step_bar(dp_bar: np.ndarray) -> float:
    """The step readings were written to, if they all sit on one (e.g. a gauge read to 0.5 psi).

    0 when the readings are not on a common step (normalised readings never are).
    """
    v = np.unique(np.asarray(dp_bar, dtype=float))
    if v.size < 2 or v.size == np.asarray(dp_bar).size:
        return 0.0
    step = float(np.min(np.diff(v)))
    if step <= 1e-9 * float(np.max(np.abs(v))):
        return 0.0
    ratio = v / step
    if np.all(np.abs(ratio - np.rint(ratio)) < 1e-3):
        return step
    return 0.0


def noise_bar(dp_bar: np.ndarray) -> float:
    """Reading-to-reading scatter of one element's readings (robust to its rising trend).

    Second differences remove a locally straight trend; for independent noise of width s they
    spread with s * sqrt(6). Readings written to a gauge step carry at least its rounding error
    (step / sqrt(12)).
    """
    y = np.asarray(dp_bar, dtype=float)
    dd = np.diff(y, 2)
    s = 0.0
    if dd.size >= 2:
        s = robust_sd(dd) / math.sqrt(6.0)
    return max(s, gauge_step_bar(y) / math.sqrt(12.0))


def drop_without_change(
    readings: Sequence[tuple[float, float]], noise: float | None = None
) -> Flag | None:
    """Flag the newest reading if ΔP fell clearly below the element's earlier level.

    The earlier level is the highest median of three successive earlier readings, so one high
    reading does not make the rest look like a fall; when the newest reading is clearly below
    the one before, also the low end of the element's trend at that reading (on a steep rise
    the median of three lags behind what the element had reached). `noise` (bar) overrides the
    scatter estimate.
    """
    t, y = _arrays(readings)
    if y.size < DROP_MIN_READINGS + 1:
        return None
    before = y[:-1]
    k = 3
    # The median of each run of three (the middle value: what np.median gives for three
    # finite values), all at once; the first of the highest, as max() over them would pick.
    medians = np.sort(np.lib.stride_tricks.sliding_window_view(before, k), axis=1)[:, k // 2]
    i_level = int(np.argmax(medians))
    level = float(medians[i_level])
    since = float(t[i_level + k - 1])
    sigma = noise if noise is not None else noise_bar(y)
    if float(y[-2]) - float(y[-1]) > DROP_NOISE_TIMES * sigma:
        # On a steep rise the median of three lags the recent readings: the element's own
        # trend at the reading before says what level the newest fell from.
        trend_level = _trend_level_bar(t[:-1], before, sigma)
        if trend_level > level:
            level, since = trend_level, float(t[-2])
    fall = level - float(y[-1])
    if fall <= DROP_NOISE_TIMES * sigma or fall <= DROP_MIN_SHARE * abs(level):
        return None
    return Flag(
        kind="drop",
        age_h=float(t[-1]),
        dp_bar=float(y[-1]),
        expected_bar=level,
        urgent=True,
        reason=(
            f"ΔP fell to {y[-1]:.3g} bar from {level:.3g} bar (at {since:.0f} h) without an "
            "element change"
        ),
        advice="check for a torn, collapsed or missing element or a bypass valve stuck open",
    )


def _trend_level_bar(t: np.ndarray, y: np.ndarray, sigma: float) -> float:
    """The low end (DROP_TREND_QUANTILE) of the growth curves fitted to readings `t`, `y`,
    at the age of the last of them: what a loading element had reached by then, one stray
    reading damped by the robust fit. -inf when there are too few readings to fit."""
    ages, dp, counts = prepare_readings(t, y)
    if ages.size < STEP_MIN_READINGS or ages[-1] <= 0:
        return -math.inf
    floor = max(sigma, 1e-3 * float(np.max(np.abs(dp))), 1e-12)
    values, weights = fit_trend(ages, dp, counts, None, floor).values_at(float(ages[-1]))
    if values.size == 0:
        return -math.inf
    return float(weighted_quantiles(values, weights, (DROP_TREND_QUANTILE,))[0])


def step_up(readings: Sequence[tuple[float, float]], noise: float | None = None) -> Flag | None:
    """Flag the newest reading if it jumps far above what the earlier readings' trend expects.

    Two tests, both needed: the newest reading lies well above the growth curves (line,
    exponential, power, blocking) fitted to the readings before it, beyond their spread and the
    noise, and ΔP rose over the last interval at least STEP_RATE_TIMES faster than over any of
    the three intervals before.
    A loading element speeds up over several readings (its knee); a dirt load arrives at once.
    Readings logged at the same age are averaged.
    """
    t, y = _arrays(readings)
    ages, dp, counts = prepare_readings(t, y)
    if ages.size < STEP_MIN_READINGS + 1 or ages[-2] <= 0:
        return None
    sigma = noise if noise is not None else noise_bar(y)
    # A loading element speeds up over several readings; a dirt load arrives in one interval.
    with np.errstate(over="ignore"):
        rates = np.diff(dp) / np.diff(ages)
    if rates[-1] <= STEP_RATE_TIMES * max(float(np.max(rates[-4:-1])), 0.0):
        return None
    floor = max(sigma, 1e-3 * float(np.max(np.abs(dp))), 1e-12)
    trend = fit_trend(ages[:-1], dp[:-1], counts[:-1], None, floor)
    values, weights = trend.values_at(float(ages[-1]))
    if values.size == 0:
        return None
    expected, upper = weighted_quantiles(values, weights, (0.5, 0.9))
    rise = max(expected - float(np.min(dp[:-1])), 0.0)
    jump = float(dp[-1]) - expected
    need = max(
        STEP_NOISE_TIMES * max(sigma, trend.sigma_bar),
        STEP_SPREAD_TIMES * (upper - expected),
        STEP_MIN_SHARE * rise,
    )
    if jump <= need:
        return None
    # A ΔP does not fall below the reading before on a loading element: where the fitted trend
    # ran below it (a falling fit extrapolated, even below zero), say what the reading before
    # was instead of a level no gauge could show.
    before = float(dp[-2])
    if expected >= before:
        level, words = float(expected), f"where the element's trend expected about {expected:.3g}"
    else:
        level, words = before, f"from {before:.3g}"
    return Flag(
        kind="step-up",
        age_h=float(ages[-1]),
        dp_bar=float(dp[-1]),
        expected_bar=level,
        urgent=False,
        reason=(
            f"ΔP jumped to {dp[-1]:.3g} bar {words} bar (dirt coming in, as after a repair or "
            "a top-up)"
        ),
        advice="take a fluid sample and check recent work, top-ups and the breather",
    )
