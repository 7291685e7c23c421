"""How far to trust the earlier-curves interval: a recalibration measured on held-out conditions.

The matcher in store/forecast/trend_history.py turns the readings into a cloud of crossing ages (its
interval widened where the matched life lies outside the earlier lives: beyond_history there).
Its spread comes from the readings' scatter and from how well each earlier curve fits; it does
not know how different the next element's conditions may be from every earlier one. So the
interval is recalibrated on residuals of elements whose condition was held out of the history
(grouped split-conformal, Mondrian by progress):

- A forecast is made at the age of the last reading t. Its remaining lives are
  r_x = x - t for x = earliest, likely, latest; the truth is r = life - t.
- The forecasts are put in bins by how far the element seems to be, p = t / likely.
- Per bin: the earliest remaining life is multiplied by the conformal 5 % point of r / r_earliest,
  the likely by the median of r / r_likely, the latest by the conformal 95 % point of
  r / r_latest. A factor below 1 pulls the date earlier.
- Applied, the earliest factor is capped at 1 and the latest kept at 1 or more: the
  recalibration may widen the matcher's interval, never narrow it. Five conditions cannot show
  how far off a sixth may be; a first, two-sided version narrowed the interval of the young
  elements (factor 1.04 at p < 0.6) and the held-out fastest condition then came in late in
  3 of 4 forecasts at half its life.

The bin edges (0.6 and 0.8 of the likely life) were fixed before any factor was looked at.

The shipped factors (SHIPPED) were derived by `python tests/benchmarks/clogging.py --calibrate`
from the 24 open PHME 2020 clogging runs (shared/data/phme20, SOURCE.md there): for each of the
six (particle size, solid ratio) conditions, its four runs forecast with the other 20 runs as
history, at 30, 35, ... 95 % of life, technician log seed 1, before any recalibration
(IDENTITY; the widening beyond the earlier lives included). tests/store/test_clogging.py derives them
again from the data and compares. The benchmark never scores these numbers on the same data: it derives them again for each held-out condition
from the other five only. They come from one laboratory rig; on a plant they move the dates by
a few per cent at most.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

EARLIEST_Q, LATEST_Q = 0.05, 0.95
PROGRESS_EDGES = (0.6, 0.8)  # bins: p < 0.6, 0.6 <= p < 0.8, p >= 0.8 (p = last reading / likely)


@dataclass(frozen=True)
class Calibration:
    """Factors on the remaining life (after the last reading), one per progress bin."""

    earliest: tuple[float, ...]
    likely: tuple[float, ...]
    latest: tuple[float, ...]
    n: tuple[int, ...] = ()  # forecasts each bin was derived from

    def factors(self, progress: float) -> tuple[float, float, float]:
        i = sum(progress >= e for e in PROGRESS_EDGES)
        return self.earliest[i], self.likely[i], self.latest[i]


IDENTITY = Calibration((1.0,) * 3, (1.0,) * 3, (1.0,) * 3)

# Derived by `python tests/benchmarks/clogging.py --calibrate` (see the module docstring).
SHIPPED = Calibration(
    earliest=(1.112, 1.013, 0.981),
    likely=(0.997, 0.979, 0.977),
    latest=(0.912, 0.948, 1.0),
    n=(163, 101, 72),
)


@dataclass(frozen=True)
class Sample:
    """One held-out forecast: ages (h) of the last reading, the interval, and the truth."""

    last_h: float
    earliest_h: float
    likely_h: float
    latest_h: float
    true_h: float


def conformal_low(values: Sequence[float], q: float) -> float:
    """The split-conformal lower q point: the floor(q (n + 1))-th smallest value (the smallest
    when there are too few values for that rank)."""
    v = sorted(values)
    k = math.floor(q * (len(v) + 1))
    return v[max(k, 1) - 1]


def conformal_high(values: Sequence[float], q: float) -> float:
    """The split-conformal upper q point: the ceil(q (n + 1))-th smallest (the largest when
    there are too few values)."""
    v = sorted(values)
    k = math.ceil(q * (len(v) + 1))
    return v[min(k, len(v)) - 1]


def _median(values: Sequence[float]) -> float:
    v = sorted(values)
    n = len(v)
    return v[n // 2] if n % 2 else 0.5 * (v[n // 2 - 1] + v[n // 2])


def _ratio(s: Sample, age_h: float) -> float:
    """True remaining life over the forecast's remaining life (after the last reading)."""
    return (s.true_h - s.last_h) / (age_h - s.last_h)


def derive(samples: Sequence[Sample]) -> Calibration:
    """Per-bin factors from held-out forecasts; a bin without usable samples keeps 1."""
    bins: list[list[Sample]] = [[] for _ in range(len(PROGRESS_EDGES) + 1)]
    for s in samples:
        if not (s.last_h < s.earliest_h <= s.likely_h and s.true_h > s.last_h):
            continue
        i = sum(s.last_h / s.likely_h >= e for e in PROGRESS_EDGES)
        bins[i].append(s)
    ea, lk, la, n = [], [], [], []
    for b in bins:
        n.append(len(b))
        if not b:
            ea.append(1.0), lk.append(1.0), la.append(1.0)
            continue
        ea.append(conformal_low([_ratio(s, s.earliest_h) for s in b], EARLIEST_Q))
        lk.append(_median([_ratio(s, s.likely_h) for s in b]))
        finite = [_ratio(s, s.latest_h) for s in b if math.isfinite(s.latest_h)]
        la.append(conformal_high(finite, LATEST_Q) if finite else 1.0)
    return Calibration(tuple(ea), tuple(lk), tuple(la), tuple(n))


def apply(
    cal: Calibration,
    last_h: float,
    interval: tuple[float, float, float],
    progress: float | None = None,
) -> tuple[float, float, float]:
    """(earliest, likely, latest) ages with their remaining lives after the last reading scaled
    by the factors of the progress bin (progress: last / likely of this interval unless given,
    e.g. the change limit's for the bypass), kept in order."""
    earliest_h, likely_h, latest_h = interval
    if not likely_h > last_h:
        return interval
    fe, fl, fu = cal.factors(last_h / likely_h if progress is None else progress)
    fe, fu = min(fe, 1.0), max(fu, 1.0)  # never narrower than the matcher's own interval
    e = last_h + fe * max(earliest_h - last_h, 0.0)
    m = last_h + fl * (likely_h - last_h)
    u = last_h + fu * (latest_h - last_h) if math.isfinite(latest_h) else latest_h
    return min(e, m), m, max(u, m)
