"""When to read a filter again: the next-reading time from the pessimistic side of the forecast.

The rule (one rule for gauges and indicator-only filters):

    read again after READ_SHARE (two thirds) of the time, counted from the last reading, until
    the chance that the element has reached its change limit passes PESSIMISTIC_P (5 %), that
    time taken towards the sooner of the dates the newest and the previous reading give,

never later than the filter's registered reading interval and never sooner than the shortest
interval the plant sets (its shortest shift: one reading a shift at most); where that share of
the time left is under a shift, the next visit is the date itself (the change); and where the
newest gauge reading is one gauge step under the change limit, the next visit is the change at
the earliest date as that reading gives it.

Why, part by part:

- Reliability-centred maintenance: an on-condition check must come at intervals shorter than
  the warning time it watches for (the P-F interval), commonly at half of it
  (# common practice, no source). Here the warning time is how soon the element could reach its
  limit: the forecast's "earliest" date, its 5 % point (store/forecast/trend.py EARLIEST_P, set
  before any measurement). Each reading re-forecasts, so the gap shrinks with the pessimistic
  remaining time: a flat, fresh element is read on the registered interval, one near its turn
  about each shift.
- The share itself was the RCM half until the closed loop was measured; it is now chosen among
  one half and two thirds (the only candidates, named before the choice was run) by the
  clogging benchmark's nested selection (tests/benchmarks/clogging.py `nested_closed`): for
  each held-out rig condition, the share that holds the overrun and life-used targets with the
  fewest readings on the other conditions' elements alone. Five of the six held-out conditions
  got two thirds; chosen on all six, two thirds too, which is what ships. Two thirds leaves
  less to spare than a half: a reading missed or reading low at two thirds of the way leaves a
  third of the warning time, not a half. In one inner choice (a history of four conditions,
  one of them held out) two thirds let an element run 4.6 % of its life past its limit, where
  a half let none: a thin history needs the safer half (README, "When to read again").
- Indicator-only filters (no numbers, nothing to fit) and gauges with too few readings: the
  service-life model of earlier elements (Weibull, given that the element had not tripped at
  its last check), the same share of the time to its conditional 5 % point: the chance of
  tripping before the next check stays under 5 % (at one half it was: before the check after
  next).
- A pessimistic plan does not relax on one reading (hysteresis; no number of its own). The
  date read towards is the sooner of the pessimistic date as the newest reading gives it and
  as the reading before gave it (`pessimistic_date`): a date moves sooner at once, later only
  when a second reading agrees. Why: a gauge reads in steps and a curve dirtier than any
  earlier one looks like the slower ones until its late turn, so one reading that pushes the
  date out (the closed loop's run 41: from about 1730 h to about 2490 h at 85 % of its life,
  the crossing at 1730 h) is weak evidence; the cost is one extra reading whenever the date
  moves out. The date before is rebuilt from the entries (the forecast from the readings up to
  the previous one, at its age: store/health/next_reading.py `_earliest_before`), so the kept row and
  an as-of audit agree. Added after the closed loop showed the run-41 failure.
- RCM's own applicability test (no number of its own): an on-condition check is worth
  planning only where it can come soon enough to leave time to spare. Where the share of the
  time left is under the plant's shortest interval (a shift), no such reading fits before the
  date: the next visit is the date itself, to change the element (rule "change"; read then if
  it is not changed), instead of a reading each shift that only moves the date by a shift
  (# common practice, no source). Closer than a shift, the shift bound holds as before. Added
  after the closed loop showed the readings it costs.

- The gauge's resolution (no number of its own): a reading tells something only where the
  gauge could show a value it has not shown yet. Where the newest reading is one gauge step
  under the change limit (the step the position's readings are written to: store/forecast/
  anomaly.py `gauge_step_bar`; a 0.5 psi gauge at 19.5 psi of a 20 psi limit), the next value
  the gauge can show is the limit itself: in P-F terms the gauge's next change is F, no longer
  a warning, so RCM's applicability test fails for the on-condition check and the task is the
  change (# common practice, no source). The next visit is the change at the forecast's
  earliest date as this reading gives it, within the registered interval; the hysteresis is
  not applied there, since the date it would hold is a reading's date, and a reading before
  the earliest date shows, but for the 5 % the date allows, the same step again. Indicator
  filters, normalised readings (not on one step) and service-life plans are not touched. The
  cost: an element whose curve turns inside that last step faster than the forecast's 5 %
  point runs past its limit until the date, where a reading each shift would have caught it
  within a shift. Added after the closed loop's count of readings (tests/benchmarks/
  clogging.py prints it) showed the last tenth taking about half of them, and of those the
  readings each shift at one step under the limit, reading that step again and again.

What it cannot promise: a forecast whose "earliest" date is late (a curve flat until a sharp
late turn, dirtier than any in the history) gives a late plan; the shrinking gap, the
hysteresis and the shift floor limit, not remove, how far an element can run past its limit,
and the hysteresis needs the reading before to have been early enough.
tests/benchmarks/clogging.py measures it in closed loop (README, "When to read again").

Pure functions over hours; calendar dates are the caller's job (store/health/next_reading.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime

# Share of the warning time: chosen between 1/2 (RCM's rule) and 2/3 by the clogging
# benchmark's nested selection (`--choose-share` on all six conditions; see above).
READ_SHARE = 2 / 3
PESSIMISTIC_P = 0.05  # the forecast's "earliest": its 5 % point (trend.EARLIEST_P)

# Why a filter's next reading falls where it does (the JSON's `next_reading.rule`).
RULES = ("forecast", "service-life", "interval", "shift", "change")


@dataclass(frozen=True)
class ReadGap:
    """Hours from the last reading to the next, and the rule that set them."""

    gap_h: float
    rule: str  # one of RULES: the forecast or service life, or the bound that took over


def bounded_gap(
    warning_h: float | None,
    every_h: float,
    shortest_h: float,
    rule: str,
    last_step: bool = False,
) -> ReadGap:
    """The gap after a reading, given the pessimistic warning time from that reading (hours
    until the limit could be reached; None: nothing to say, read on the interval; zero or
    less: it may be there already). every_h: the registered reading interval; shortest_h: the
    plant's shortest interval. The registered interval wins over the shortest if they cross.
    last_step: the reading is one gauge step under the limit (`at_last_step`): the gauge can
    show nothing before the limit itself, so the next visit is the date (the change)."""
    if not (math.isfinite(every_h) and every_h > 0):
        raise ValueError(f"a reading interval must be a positive number of hours, not {every_h}")
    shortest_h = min(max(shortest_h, 0.0), every_h)
    if warning_h is None or math.isnan(warning_h):
        return ReadGap(every_h, "interval")
    if last_step and warning_h > 0:
        # No reading before the date can show more than this one did: the visit is the change.
        if warning_h >= every_h:
            return ReadGap(every_h, "interval")
        return ReadGap(warning_h, "change")
    gap = READ_SHARE * warning_h
    if gap >= every_h:
        return ReadGap(every_h, "interval")
    if gap < shortest_h:
        # No reading can fall between here and the date with one to spare: the next visit
        # is at the date itself, to change the element (or a shift on, if that is sooner).
        if warning_h > shortest_h:
            return ReadGap(warning_h, "change")
        return ReadGap(shortest_h, "shift")
    return ReadGap(gap, rule)


def at_last_step(last_bar: float, limit_bar: float, step_bar: float) -> bool:
    """Whether the newest reading is the gauge's last step under the change limit: under the
    limit, and one step more (step_bar, the step the readings are written to; 0: not known)
    reaches it. The next value such a gauge can show is the limit itself."""
    if not (step_bar > 0 and math.isfinite(step_bar) and last_bar < limit_bar):
        return False
    # a relative millionth: the step is found from readings converted between units
    return last_bar + step_bar >= limit_bar * (1 - 1e-6)


def pessimistic_date(now_says: datetime, before: datetime | None) -> datetime:
    """The date the next reading is planned towards: the pessimistic date as the newest
    reading gives it, or as the reading before gave it where that is sooner. A date moves
    later only once two readings in a row agree; it moves sooner on one."""
    return now_says if before is None else min(now_says, before)


def life_warning_h(shape: float, scale_h: float, age_h: float, p: float = PESSIMISTIC_P) -> float:
    """Element hours after age_h by which a share p of the elements that lasted to age_h have
    reached the limit (Weibull shape, scale in hours): S(age + w) / S(age) = 1 - p."""
    if not (shape > 0 and scale_h > 0 and 0 < p < 1):
        raise ValueError("a Weibull needs a positive shape and scale, and 0 < p < 1")
    age_h = max(age_h, 0.0)
    z = (age_h / scale_h) ** shape
    return scale_h * (z - math.log1p(-p)) ** (1.0 / shape) - age_h


def shortest_shift_h(starts: list[str]) -> float:
    """The shortest shift of a pattern given as its 'HH:MM' starts (any order), in nominal
    hours (a daylight-saving night is not counted); 24 for one shift or none."""
    minutes = sorted({int(s[:2]) * 60 + int(s[3:5]) for s in starts})
    if len(minutes) < 2:
        return 24.0
    steps = [b - a for a, b in zip(minutes, minutes[1:], strict=False)]
    steps.append(minutes[0] + 1440 - minutes[-1])
    return min(steps) / 60.0
