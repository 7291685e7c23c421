"""Fluid care beyond filters: top-up consumption, top-up filtration, temperature, samples, breathers."""

from __future__ import annotations

import re
from collections.abc import Sequence
from datetime import datetime, timedelta
from functools import lru_cache
from operator import attrgetter
from typing import NamedTuple

from store.base.records import frozen_record
from store.ledger.entries import Entry, Reading, Sample, TopUp
from store.ledger.journal import SwapMark
from store.ledger.register import Breather, FilterPosition, Unit
from store.physics.cleanliness import compare_to_target, parse_code

DRUM_OIL_UM = 50.0  # common practice, no source: new oil from a drum is often only ~50-70 µm clean
RECENT_DAYS = 28
LEAK_FACTOR = 2.0  # recent use this many times the unit's own history counts as a rise
MIN_HISTORY_DAYS = 56
_RECENT = timedelta(days=RECENT_DAYS)


@frozen_record
class Consumption:
    """Fluid added per week (calendar) and per 100 operating hours where known."""

    recent_l_per_week: float
    history_l_per_week: float | None
    recent_l_per_100h: float | None
    rising: bool
    note: str


class Fill(NamedTuple):
    """A live top-up as the fluid-care windows read it: when, how much, how finely filtered,
    at what hour-meter reading (of a TopUp, or straight from a kept unit row)."""

    at: datetime
    volume_l: float
    filtered_um: float | None
    hours: float | None


def topup_consumption(
    unit: Unit,
    fills: Sequence[Fill],
    now: datetime,
    first_entry: datetime | None,
    earlier_l: float = 0,
    earlier_n: int = 0,
) -> Consumption | None:
    """Compare the last four weeks' top-ups with the unit's own earlier rate. `fills`: live
    top-ups, oldest first; `earlier_l`, `earlier_n`: the volume (added up in time order) and
    count of live top-ups before `fills` and before the last four weeks (a kept status holds
    those as one sum)."""
    live = [t for t in fills if t.at <= now]
    if not (live or earlier_n) or first_entry is None:
        return None
    recent_start = now - _RECENT
    recent_live = [t for t in live if t.at > recent_start]
    recent = sum([t.volume_l for t in recent_live])
    recent_rate = recent / (RECENT_DAYS / 7)
    history_days = (recent_start - first_entry).total_seconds() / 86400
    history_rate = None
    if history_days >= MIN_HISTORY_DAYS:
        earlier = earlier_l  # added up in order, so that a kept sum carries on exactly
        for t in live:
            if t.at <= recent_start:
                earlier += t.volume_l
        history_rate = earlier / (history_days / 7)
    per_100h = None
    with_hours = [t for t in recent_live if t.hours is not None] if unit.hour_meter else []
    if len(with_hours) >= 2:
        span_h = with_hours[-1].hours - with_hours[0].hours  # type: ignore[operator]
        if span_h > 0:
            per_100h = sum(t.volume_l for t in with_hours[1:]) / span_h * 100
    floor = 0.002 * (
        unit.reservoir_l or 100.0
    )  # ignore rises smaller than 0.2 % of the tank a week
    rising = bool(
        history_rate is not None
        and recent_rate > floor
        and recent_rate > LEAK_FACTOR * max(history_rate, floor / LEAK_FACTOR)
    )
    note = f"{recent_rate:.1f} L/week over {RECENT_DAYS} days" + (
        f" against {history_rate:.1f} L/week before" if history_rate is not None else ""
    )
    return Consumption(recent_rate, history_rate, per_100h, rising, note)


def finest_rating_um(filters: Sequence[FilterPosition]) -> float | None:
    """The finest rating among a unit's filters (those that give one), None for none."""
    ratings = [f.rating_um for f in filters if f.rating_um]
    return min(ratings) if ratings else None


def filtration_problem(topup: Fill | TopUp, finest_um: float | None) -> str | None:
    """Why a top-up may have brought dirt in, or None, given the finest rating of its unit's
    filters (`finest_rating_um`)."""
    if topup.filtered_um is None:
        return (
            f"{topup.volume_l:g} L went in unfiltered: new oil is often only about "
            f"{DRUM_OIL_UM:g}-70 µm clean"
        )
    if finest_um is not None and topup.filtered_um > finest_um:
        return (
            f"{topup.volume_l:g} L went in through {topup.filtered_um:g} µm, coarser than "
            f"the unit's finest filter ({finest_um:g} µm)"
        )
    return None


def hot_readings(unit: Unit, readings: Sequence[Reading]) -> list[Reading]:
    return [
        r for r in readings if not r.voided and r.temp_c is not None and r.temp_c > unit.max_temp_c
    ]


@frozen_record
class SampleVerdict:
    sample: Sample
    code: str | None
    meets: bool | None
    text: str


def sample_verdict(unit: Unit, sample: Sample) -> SampleVerdict:
    if not sample.code:
        return SampleVerdict(sample, None, None, "no particle code")
    if not unit.target_code:
        return SampleVerdict(sample, sample.code, None, f"{sample.code} (no target set)")
    comparison = compare_to_target(parse_code(sample.code), parse_code(unit.target_code))
    return SampleVerdict(sample, sample.code, comparison.meets, comparison.describe())


# ---- breathers -----------------------------------------------------------------------------------

_FRACTION = re.compile(r"(\d+)\s*/\s*(\d+)|(\d+(?:\.\d+)?)\s*%")


def _median(values: Sequence[float]) -> float:
    """The middle value, or the mean of the two middle ones: statistics.median's own rule
    (Python 3.11's source), without loading statistics (and fractions, decimal) on the start
    path."""
    ordered = sorted(values)
    half = len(ordered) // 2
    if len(ordered) % 2 == 1:
        return ordered[half]
    return (ordered[half - 1] + ordered[half]) / 2


@lru_cache(maxsize=512)  # a plant's swaps say the same few words: each read once
def spent_fraction(condition: str) -> float | None:
    """'2/3 spent' -> 0.67, '80 %' -> 0.8, 'spent'/'exhausted' -> 1.0, 'fresh' -> 0.0."""
    text = condition.lower()
    match = _FRACTION.search(text)
    if match:
        if match.group(3):
            return min(float(match.group(3)) / 100, 1.0)
        den = float(match.group(2))
        return min(float(match.group(1)) / den, 1.0) if den else None
    if any(w in text for w in ("spent", "exhausted", "saturated", "full")):
        return 1.0
    if any(w in text for w in ("fresh", "unused", "ok", "good")):
        return 0.0
    return None


@frozen_record
class BreatherForecast:
    last_swap: datetime | None
    due: datetime | None
    interval_d: float
    basis: str  # "condition" (from how spent earlier cartridges were) or "interval"
    overdue: bool
    last_condition: str


_at = attrgetter("at")


class SwapRecord(NamedTuple):
    """What a breather's forecast takes of its live swaps: the median of its cartridges'
    lives in days as their desiccant told them (days in service ÷ the fraction spent; None
    where no swap told one), and the last swap's time and condition. Kept per breather
    (store/derived/breathercache.py), so that a list need not read every swap."""

    median_life_d: float | None
    last_at: datetime | None
    last_condition: str


NO_SWAPS = SwapRecord(None, None, "")  # a breather never swapped: the set interval from nothing


def swap_record(swaps: Sequence[SwapMark]) -> SwapRecord:
    """`swaps`: a breather's live swaps (`journal.live_swap_marks`), in any order."""
    live = sorted(swaps, key=_at)
    lives = []
    for prev, cur in zip(live, live[1:], strict=False):
        days = (cur.at - prev.at).total_seconds() / 86400  # type: ignore[operator]
        fraction = spent_fraction(cur.condition)
        if fraction and fraction >= 0.2 and days > 0:
            lives.append(days / fraction)
    if not live:
        return NO_SWAPS
    return SwapRecord(_median(lives) if lives else None, live[-1].at, live[-1].condition)


def forecast_from(breather: Breather, record: SwapRecord, now: datetime) -> BreatherForecast:
    """Next swap: the set interval, shortened or stretched by how spent earlier cartridges were
    (`record`: what the breather's live swaps come to, `swap_record`)."""
    interval_d = breather.swap_interval_d
    basis = "interval"
    if record.median_life_d is not None:
        interval_d = min(0.9 * record.median_life_d, 2 * breather.swap_interval_d)
        basis = "condition"
    last = record.last_at
    due = last + timedelta(days=interval_d) if last else None
    return BreatherForecast(
        last, due, interval_d, basis, bool(due and due < now), record.last_condition
    )


def kinds_of(entries: Sequence[Entry], cls: type) -> list:
    return [e for e in entries if isinstance(e, cls)]
