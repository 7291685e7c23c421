"""The status model: the records of the watch list (a filter's, breather's and unit's
status, the list itself) and the kept rows' forms of them (`to_row`/`from_row` beside each
dataclass the status cache keeps), with what of a filter's status moves with the clock
alone (`Clock`, and `at_time`/`clock_parts`, which a kept row is read through). Computing a
status is store/health/status.py.

Flag codes (also listed in the README):
  filters   dp-drop, step-up, fast-loading, at-bypass, over-limit, indicator-bypass,
            indicator-dirty, cold-start-bypass, new-element-high, reading-overdue, hot,
            no-limits
  breathers swap-overdue, desiccant-spent
  units     leak-suspect, unfiltered-topup, coarse-topup, over-target, water-high, hot
"""

from __future__ import annotations

import math
from array import array
from base64 import b64decode, b64encode
from collections.abc import Sequence
from dataclasses import asdict, field, fields, replace
from datetime import datetime, timedelta
from functools import partial
from typing import TYPE_CHECKING, Any, NamedTuple

from store.base.records import filled_record, frozen_record
from store.base.timeutil import format_utc
from store.health import urgency as ranking
from store.health.elements import Point
from store.health.fluidcare import BreatherForecast, Consumption, Fill
from store.health.notes import Note
from store.ledger.entries import TopUp
from store.physics.normalise import ColdStart

if TYPE_CHECKING:  # the fitting maths (numpy, scipy) load on first use: a watch list read
    from store.forecast import trend  # from the status cache needs none of it

# Dirty oil is reaching the system now (or the element is gone): these sort first. The one
# order of the watch list lives in store/health/urgency.py.
URGENT_FLAGS = ranking.URGENT_FLAGS
HOT_LOOKBACK = timedelta(days=7)
FLAG_WORDS = {
    "dp-drop": "ΔP DROP",
    "step-up": "STEP UP",
    "fast-loading": "FAST LOAD",
    "at-bypass": "AT BYPASS",
    "over-limit": "OVER LIMIT",
    "indicator-bypass": "IND BYPASS",
    "indicator-dirty": "IND DIRTY",
    "cold-start-bypass": "cold start",  # a caution, not an alarm (store/health/urgency.py)
    "reading-overdue": "READ DUE",
    "hot": "HOT",
    "no-limits": "NO LIMITS",
    "swap-overdue": "SWAP DUE",
    "desiccant-spent": "SPENT",
    "leak-suspect": "LEAK?",
    "unfiltered-topup": "UNFILTERED",
    "coarse-topup": "COARSE FILL",
    "over-target": "DIRTY OIL",
    "water-high": "WATER",
    "new-element-high": "NEW HIGH",
}


def _stamp(moment: datetime | None) -> str | None:
    return None if moment is None else format_utc(moment)


def _moment(text: str | None) -> datetime | None:
    """A time as a kept row holds it (format_utc's, so read as it is)."""
    return None if text is None else _from_iso(text)


_from_iso = datetime.fromisoformat


@frozen_record
class Due:
    earliest: datetime
    likely: datetime
    latest: datetime | None  # None: no upper bound the data can support

    def to_row(self) -> dict[str, Any]:
        return {
            "earliest": format_utc(self.earliest),
            "likely": format_utc(self.likely),
            "latest": _stamp(self.latest),
        }

    @classmethod
    def from_row(cls, row: dict[str, Any]) -> Due:
        return cls(_from_iso(row["earliest"]), _from_iso(row["likely"]), _moment(row["latest"]))


MAX_AGE_H = 20 * 8766.0  # twenty years of element age: later "dates" are no dates
_LIFE_P = (0.05, 0.10, 0.50)  # service-life due: 5 %, 10 % (the planned change), 50 % points


class _Ages(NamedTuple):  # an age interval, as trend.AgeInterval (without numpy)
    earliest_h: float
    likely_h: float
    latest_h: float


def due_of(interval: trend.AgeInterval | _Ages | None, age_to_time: Any) -> Due | None:
    if interval is None:
        return None
    if not interval.likely_h < MAX_AGE_H:  # beyond any sensible plan: no date
        return None
    latest_h = interval.latest_h
    return filled_record(  # Due(earliest, likely, latest), made for every row of a list
        Due,
        {
            "earliest": age_to_time(interval.earliest_h).replace(microsecond=0),
            "likely": age_to_time(interval.likely_h).replace(microsecond=0),
            "latest": age_to_time(latest_h).replace(microsecond=0)
            if latest_h < MAX_AGE_H
            else None,
        },
    )


@frozen_record
class LifeSummary:
    b10_h: float
    b50_h: float
    n_failed: int
    n_censored: int
    pooled: bool  # fitted with like positions' lives (same element): too few of its own


def weibull_remaining_h(shape: float, scale_h: float, age_h: float, p: float) -> float:
    """`life.WeibullFit.remaining_quantile_h` without numpy (the same sums): hours beyond
    age_h by which a share p of elements that survived to age_h reach the limit."""
    z = (max(age_h, 0.0) / scale_h) ** shape
    return scale_h * (z - math.log1p(-p)) ** (1.0 / shape) - max(age_h, 0.0)


def _life_ages(shape: float, scale_h: float, age_h: float) -> _Ages:
    """The ages at which `_LIFE_P` of elements that survived to age_h reach the limit: age_h
    + `weibull_remaining_h` at each share, the same sums with the survival term worked
    out once (tests/store/test_timeproof.py holds them equal)."""
    aged = max(age_h, 0.0)
    z, power = (aged / scale_h) ** shape, 1.0 / shape
    p5, p10, p50 = _LIFE_P
    return _Ages(
        age_h + (scale_h * (z - math.log1p(-p5)) ** power - aged),
        age_h + (scale_h * (z - math.log1p(-p10)) ** power - aged),
        age_h + (scale_h * (z - math.log1p(-p50)) ** power - aged),
    )


@frozen_record
class Clock:
    """What of a filter's status moves with the clock alone, and what it moves from (the
    entries only). The status cache keeps it beside the row, so that `at_time` gives the
    status at any later time without the fitting maths (`status_from` ends with it too).

    Good for any time from `valid_from` on (the newest reading of the element in service, or
    the time it was computed at, whichever is earlier): older hot readings no longer count."""

    valid_from: datetime | None
    origin: datetime | None  # calendar ages count from here (None: not known, age 0 now) ...
    meter: tuple[datetime, float, float] | None  # ... or (last meter time, age then, h/day)
    due_ages: tuple[Any, Any] | None  # without an origin: the due ages, dated from now
    last_age_h: float  # the newest reading's age: the forecast's "now" is never earlier
    state: str  # the state before the clock's say (check-now, indicator-only)
    check_after_h: float | None  # an "ok" element is "check-now" once older than this
    life: tuple[float, float] | None  # Weibull (shape, scale_h): service-life due, given age
    hot: tuple[tuple[datetime, float], ...]  # (time, °C) of hot readings that can still count
    max_temp_c: float

    def age_h(self, now: datetime) -> float:
        """The element's age at `now`: operating hours at the recent rate, or calendar hours."""
        if self.meter is not None:
            last_t, age_then, rate = self.meter
            return age_then + rate * (now - last_t).total_seconds() / 86400
        return max((now - (self.origin or now)).total_seconds() / 3600, 0.0)

    def time_at(self, age_h: float, now: datetime) -> datetime:
        """When the element reaches an age."""
        if self.meter is not None:
            last_t, age_then, rate = self.meter
            return last_t + timedelta(days=(age_h - age_then) / rate)
        return (self.origin or now) + timedelta(hours=age_h)

    def to_row(self) -> dict[str, Any]:
        """By field name; floats as they are (JSON keeps a float64 exactly, inf too)."""
        return {
            "valid_from": _stamp(self.valid_from),
            "origin": _stamp(self.origin),
            "meter": [format_utc(self.meter[0]), *self.meter[1:]] if self.meter else None,
            "due_ages": None
            if self.due_ages is None
            else [None if a is None else list(a) for a in self.due_ages],
            "last_age_h": self.last_age_h,
            "state": self.state,
            "check_after_h": self.check_after_h,
            "life": list(self.life) if self.life else None,
            "hot": [[format_utc(at), temp_c] for at, temp_c in self.hot],
            "max_temp_c": self.max_temp_c,
        }

    @classmethod
    def from_row(cls, row: dict[str, Any]) -> Clock:
        meter, due_ages, life, hot = row["meter"], row["due_ages"], row["life"], row["hot"]
        return cls(  # in field order
            _moment(row["valid_from"]),
            _moment(row["origin"]),
            None if meter is None else (_from_iso(meter[0]), meter[1], meter[2]),
            None if due_ages is None else tuple(None if a is None else _Ages(*a) for a in due_ages),  # type: ignore[arg-type]
            row["last_age_h"],
            row["state"],
            row["check_after_h"],
            None if life is None else (life[0], life[1]),
            tuple([(_from_iso(at), temp_c) for at, temp_c in hot]) if hot else (),
            row["max_temp_c"],
        )


CLOCK_FLAGS = ("reading-overdue", "hot")  # the flags `at_time` sets (always the last ones)


def at_time(status: FilterStatus, clock: Clock, now: datetime) -> FilterStatus:
    """The status at `now` (not before `clock.valid_from`): the element's age, check-now,
    a service-life due given the age so far, reading-overdue and hot, from the status
    computed at any other time."""
    parts = clock_parts(
        status.flags, status.note_codes, status.due, status.bypass_due, status.gauge,
        status.overdue_at, clock, now,
    )  # fmt: skip
    return replace(status, **parts, clock=clock)


def clock_parts(
    flags_then: Sequence[str],
    note_codes: Sequence[Note],
    due: Due | None,
    bypass_due: Due | None,
    gauge: bool,
    overdue_at: datetime | None,
    clock: Clock,
    now: datetime,
    words: tuple[Sequence[str], Sequence[str]] | None = None,
) -> dict[str, Any]:
    """The fields of a status that `at_time` sets, from the ones it reads (a kept row is
    decoded straight into them): the notes' words among them. `words`: the words of
    `note_codes` as already written out, (for any state but check-now, for check-now)."""
    age_now = clock.age_h(now)
    state = clock.state
    time_at = partial(clock.time_at, now=now)
    if clock.due_ages is not None:
        due, bypass_due = (due_of(ages, time_at) for ages in clock.due_ages)
    if clock.check_after_h is not None and state == "ok":
        if clock.check_after_h <= max(age_now, clock.last_age_h):
            state = "check-now"
    if clock.life is not None:
        shape, scale_h = clock.life
        due = due_of(_life_ages(shape, scale_h, age_now), time_at)
    if not gauge and due is None and state in ("no-readings", "too-few-readings"):
        state = "indicator-only"
    flags = [f for f in flags_then if f not in CLOCK_FLAGS]
    if words is None:
        notes = [note.text(state) for note in note_codes]
    else:
        notes = list(words[state == "check-now"])
    if overdue_at and now > overdue_at:
        flags.append("reading-overdue")
    recent_hot = [temp_c for at, temp_c in clock.hot if now - at <= HOT_LOOKBACK]
    if recent_hot:
        flags.append("hot")
        hot = Note("hot", {"temp_c": max(recent_hot), "limit_c": clock.max_temp_c})
        notes.append(hot.text(state))
    return {
        "state": state,
        "due": due,
        "bypass_due": bypass_due,
        "flags": tuple(dict.fromkeys(flags)),
        "notes": tuple(notes),
        "element_age_h": age_now,
    }


@frozen_record
class FilterStatus:
    filter: str
    unit: str
    kind: str
    gauge: bool
    dp_bar: float | None
    dp_ref_bar: float | None
    temp_c: float | None
    indicator: str | None
    reading_at: datetime | None
    limit_bar: float | None
    bypass_bar: float | None
    clean_bar: float | None
    percent_of_limit: float | None
    due: Due | None
    bypass_due: Due | None
    basis: str
    state: str
    flags: tuple[str, ...]
    notes: tuple[str, ...]
    readings_since_change: int
    changed_at: datetime | None
    element_age_h: float
    reference: str
    cold: ColdStart | None
    life: LifeSummary | None
    history: tuple[Point, ...]  # readings of the current element (empty when read from cache)
    spark: tuple[float, ...] = ()  # normalised ΔP of the current element, for sparklines
    overdue_at: datetime | None = None  # when the next reading becomes overdue
    pace: float | None = None  # earlier lives / this element's likely life (> 1: faster)
    next_reading: datetime | None = None  # read again by then (store/forecast/readplan.py)
    next_rule: str = ""  # what set it: readplan.RULES
    note_codes: tuple[Note, ...] = ()  # the notes as codes (`notes` are their words, at_time)
    forecast: trend.Forecast | None = field(default=None, compare=False)
    age_to_time: Any = field(default=None, compare=False)  # element age (h) -> datetime
    clock: Clock | None = field(default=None, compare=False)  # what moves with the clock

    def urgency(self, now: datetime) -> tuple:
        """Its place in the one order at `now` (store/health/urgency.py), overdue by the same
        rule as the watch list's rows and the shift log's status rows."""
        due = self.due.likely if self.due else None
        overdue = ranking.filter_overdue(self.state, due, now)
        return ranking.order_key(self.flags, overdue, due, self.percent_of_limit, self.filter)

    def to_row(self) -> dict[str, Any]:
        """What a kept row holds, by field name: everything but what `at_time` works out when
        the row is read (the notes' words, the element's age) and what only a computation
        has (history, forecast, age_to_time); the notes as their codes."""
        row: dict[str, Any] = {}
        for name in ROW_FIELDS:
            value = getattr(self, name)
            if name in _ROW_TIMES:
                value = _stamp(value)
            elif name in ("due", "bypass_due"):
                value = None if value is None else value.to_row()
            elif name in ("cold", "life"):
                value = None if value is None else asdict(value)
            elif name == "note_codes":
                value = [note.to_row() for note in value]
            elif name == "clock":
                value = None if value is None else value.to_row()
            elif name == "flags":
                value = list(value)
            elif name == "spark":  # float64 exactly, packed: JSON reads 40 numbers slowly
                value = b64encode(array("d", value).tobytes()).decode()
            row[name] = value
        return row

    @classmethod
    def from_row(cls, row: dict[str, Any], now: datetime) -> FilterStatus:
        """A kept row brought to `now` (`at_time`'s parts worked out in one go)."""
        clock = Clock.from_row(row["clock"])
        due, bypass_due = row["due"], row["bypass_due"]
        if clock.due_ages is None:  # (otherwise clock_parts dates them again)
            due = None if due is None else Due.from_row(due)
            bypass_due = None if bypass_due is None else Due.from_row(bypass_due)
        cold, life = row["cold"], row["life"]
        spark = array("d")
        spark.frombytes(b64decode(row["spark"]))
        codes = tuple([Note.from_row(n) for n in row["note_codes"]])
        overdue_at = _moment(row["overdue_at"])
        flags = tuple(row["flags"])
        timed = clock_parts(flags, codes, due, bypass_due, row["gauge"], overdue_at, clock, now)
        return cls(
            row["filter"],
            row["unit"],
            row["kind"],
            row["gauge"],
            row["dp_bar"],
            row["dp_ref_bar"],
            row["temp_c"],
            row["indicator"],
            _moment(row["reading_at"]),
            row["limit_bar"],
            row["bypass_bar"],
            row["clean_bar"],
            row["percent_of_limit"],
            timed["due"],
            timed["bypass_due"],
            row["basis"],
            timed["state"],
            timed["flags"],
            timed["notes"],
            row["readings_since_change"],
            _moment(row["changed_at"]),
            timed["element_age_h"],
            row["reference"],
            None if cold is None else ColdStart(**cold),
            None if life is None else LifeSummary(**life),
            (),  # history: no kept row has it
            tuple(spark),
            overdue_at,
            row["pace"],
            _moment(row["next_reading"]),
            row["next_rule"],
            codes,
            None,
            None,
            clock,
        )


# What FilterStatus.to_row keeps (every field but these), and which of them are times.
_NOT_KEPT = ("notes", "element_age_h", "history", "forecast", "age_to_time")
ROW_FIELDS = tuple(f.name for f in fields(FilterStatus) if f.name not in _NOT_KEPT)
_ROW_TIMES = ("reading_at", "changed_at", "overdue_at", "next_reading")


@frozen_record
class BreatherStatus:
    breather: str
    unit: str
    kind: str
    forecast: BreatherForecast
    flags: tuple[str, ...]

    @property
    def urgency(self) -> tuple:
        fc = self.forecast
        return ranking.order_key(self.flags, fc.overdue, fc.due, None, self.breather)


@frozen_record
class UnitStatus:
    unit: str
    name: str
    area: str
    consumption: Consumption | None
    latest_code: str | None
    target_code: str | None
    sample_text: str
    flags: tuple[str, ...]
    notes: tuple[str, ...]


@frozen_record
class Watch:
    as_of: datetime
    filters: tuple[FilterStatus, ...]
    breathers: tuple[BreatherStatus, ...]
    units: tuple[UnitStatus, ...]
    # A list read now: the filters whose kept rows did not hold, computed in memory (what a
    # refresh would recompute); empty for a list as of a past time.
    recomputed: tuple[str, ...] = field(default=(), compare=False)


@frozen_record
class UnitClock:
    """What a unit's status is worked out from at any time from `valid_from` on (when it was
    computed): the entries only, so the status cache keeps it instead of the status."""

    valid_from: datetime
    first_at: datetime | None  # the unit's first entry: its top-up history starts there
    early_l: float  # live top-ups before every window from valid_from on: volume, added up
    early_n: int  # ... in time order, and how many
    topups: tuple[TopUp, ...]  # the later live top-ups, oldest first
    sample: tuple[str | None, str, bool | None] | None  # latest sample: code, words, meets
    hot: tuple[datetime, ...]  # readings over the unit's limit that can still count
    water_ppm: float | None = None  # water in the newest sample that says

    def to_row(self) -> dict[str, Any]:
        return {
            "valid_from": format_utc(self.valid_from),
            "first_at": _stamp(self.first_at),
            "early_l": self.early_l,
            "early_n": self.early_n,
            "topups": [
                [t.id, format_utc(t.at), t.volume_l, t.filtered_um, t.hours]  # type: ignore[arg-type]
                for t in self.topups
            ],
            "sample": list(self.sample) if self.sample else None,
            "hot": [format_utc(at) for at in self.hot],
            "water_ppm": self.water_ppm,
        }

    def inputs(self) -> UnitInputs:
        """What a status at a time is worked out from (`units.unit_at`)."""
        fills = [Fill(t.at, t.volume_l, t.filtered_um, t.hours) for t in self.topups]  # type: ignore[arg-type]
        return UnitInputs(
            self.first_at,
            self.early_l,
            self.early_n,
            tuple(fills),
            self.sample,
            self.hot,
            self.water_ppm,
        )


class UnitInputs(NamedTuple):
    """A `UnitClock` as a status at a time reads it (`units.unit_status_from`): all but
    `valid_from`, its top-ups as `Fill`s. `from_row` reads one straight from a kept row
    (`UnitClock.to_row`'s) with no TopUp built: a status reads four of a top-up's fields."""

    first_at: datetime | None
    early_l: float
    early_n: int
    fills: tuple[Fill, ...]
    sample: tuple[str | None, str, bool | None] | None
    hot: tuple[datetime, ...]
    water_ppm: float | None

    @classmethod
    def from_row(cls, row: dict[str, Any]) -> UnitInputs:
        # the row's times are format_utc's, read as they are (as `_moment` reads them)
        fills = [Fill(_from_iso(at), v, um, h) for _, at, v, um, h in row["topups"]]
        return cls(
            _moment(row["first_at"]),
            row["early_l"],
            row["early_n"],
            tuple(fills),
            tuple(row["sample"]) if row["sample"] else None,  # type: ignore[arg-type]
            tuple([_from_iso(at) for at in row["hot"]]),
            row["water_ppm"],
        )
