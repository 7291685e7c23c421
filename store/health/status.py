"""The watch list: per filter, breather and unit, what is due and what looks wrong.

Everything here is derived from the entries and the register; `watch(book, as_of=T)`
answers as the book stood at T (entries after it are ignored).

Flag codes (also listed in the README):
  filters   dp-drop, step-up, fast-loading, at-bypass, over-limit, indicator-bypass,
            indicator-dirty, cold-start-bypass, reading-overdue, hot, no-limits
  breathers swap-overdue, desiccant-spent
  units     leak-suspect, unfiltered-topup, coarse-topup, over-target, water-high, hot
"""

from __future__ import annotations

import math
from array import array
from base64 import b64decode, b64encode
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field, fields, replace
from datetime import datetime, timedelta
from functools import partial
from typing import TYPE_CHECKING, Any, NamedTuple

from store.base.errors import BookError
from store.base.timeutil import format_utc
from store.db.book import Book
from store.health import rules
from store.health import urgency as ranking
from store.health.conditions import FilterContext, contexts_from, shortest_read_h
from store.health.elements import (
    Element,
    ElementSummary,
    Point,
    hours_per_day,
    split_elements,
    split_summaries,
    summarise,
    with_running_rate,
)
from store.health.fluidcare import (
    BreatherForecast,
    Consumption,
    breather_forecast,
    hot_readings,
    sample_verdict,
    spent_fraction,
    topup_consumption,
    topup_filtration_problem,
)
from store.health.lives import like_lives, like_lives_all, live_changes
from store.health.notes import NOTE_TEXT, Note
from store.ledger.entries import Entry, TopUp
from store.ledger.journal import (
    breather_swaps,
    element_items_until,
    live_changes_until,
    parse_stamp,
    read,
)
from store.ledger.register import Breather, FilterPosition, Fluid, Unit, list_all
from store.physics.normalise import ColdStart, cold_start

if TYPE_CHECKING:  # the fitting maths (numpy, scipy) load on first use: a watch list read
    from store.forecast import trend  # from the status cache needs none of it
    from store.forecast.life import WeibullFit

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


@dataclass(frozen=True)
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


def _due(interval: trend.AgeInterval | _Ages | None, age_to_time: Any) -> Due | None:
    if interval is None:
        return None

    def at(age_h: float) -> datetime:
        return age_to_time(age_h).replace(microsecond=0)

    if not interval.likely_h < MAX_AGE_H:  # beyond any sensible plan: no date
        return None
    latest = at(interval.latest_h) if interval.latest_h < MAX_AGE_H else None
    return Due(at(interval.earliest_h), at(interval.likely_h), latest)


@dataclass(frozen=True)
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


@dataclass(frozen=True)
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
) -> dict[str, Any]:
    """The fields of a status that `at_time` sets, from the ones it reads (a kept row is
    decoded straight into them): the notes' words among them."""
    age_now = clock.age_h(now)
    state = clock.state
    time_at = partial(clock.time_at, now=now)
    if clock.due_ages is not None:
        due, bypass_due = (_due(ages, time_at) for ages in clock.due_ages)
    if clock.check_after_h is not None and state == "ok":
        if clock.check_after_h <= max(age_now, clock.last_age_h):
            state = "check-now"
    if clock.life is not None:
        shape, scale_h = clock.life
        due = _due(
            _Ages(*(age_now + weibull_remaining_h(shape, scale_h, age_now, p) for p in _LIFE_P)),
            time_at,
        )
    if not gauge and due is None and state in ("no-readings", "too-few-readings"):
        state = "indicator-only"
    flags = [f for f in flags_then if f not in CLOCK_FLAGS]
    notes = [note.text(state) for note in note_codes]
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


@dataclass(frozen=True)
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

    @property
    def urgency(self) -> tuple:
        """Its place in the one order (store/health/urgency.py); overdue as the clock the
        status was worked out at saw it (at_time sets check-now)."""
        overdue = self.state in ranking.OVERDUE_STATES
        due = self.due.likely if self.due else None
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


@dataclass(frozen=True)
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


@dataclass(frozen=True)
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


@dataclass(frozen=True)
class Watch:
    as_of: datetime
    filters: tuple[FilterStatus, ...]
    breathers: tuple[BreatherStatus, ...]
    units: tuple[UnitStatus, ...]


# ---- filters -------------------------------------------------------------------------------------


def _life(
    ctx: FilterContext, past: Sequence[ElementSummary], like: Sequence[tuple[float, bool]]
) -> tuple[WeibullFit | None, bool]:
    """Weibull of this position's element lives, pooled with like positions' if it has too
    few for a fit of its own; and whether it was pooled."""
    from store.forecast.life import fit_weibull  # deferred: numpy/scipy load on first fit

    failed, censored = [], []
    for el in past:
        life = el.life_h()
        if life is None or life <= 0:
            continue
        (failed if el.reached_limit(ctx.position.limit_bar) else censored).append(life)
    fit = fit_weibull(failed, censored) if len(failed) >= 3 else None
    if fit is None and like:
        pooled = fit_weibull(
            failed + [h for h, r in like if r], censored + [h for h, r in like if not r]
        )
        return pooled, pooled is not None
    return fit, False


def own_failures(ctx: FilterContext, past: Sequence[ElementSummary]) -> int:
    """Removed elements that reached the limit: with fewer than 3 the status pools the lives
    of like positions (so a change on one of those can change it)."""
    return sum(
        1
        for el in past
        if (life := el.life_h()) is not None
        and life > 0
        and el.reached_limit(ctx.position.limit_bar)
    )


def _past(ctx: FilterContext, past: Sequence[ElementSummary]) -> list[trend.PastElement]:
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    out = []
    for el in past:
        life = el.life_h()
        if life and life > 0 and el.ages_h:
            out.append(
                trend.PastElement(
                    ages_h=el.ages_h,
                    dp_ref_bar=el.dp_ref_bar,
                    life_h=life,
                    reached_limit=el.reached_limit(ctx.position.limit_bar),
                )
            )
    return out


def _pace(
    ctx: FilterContext, past: Sequence[ElementSummary], forecast: trend.Forecast | None
) -> trend.Pace | None:
    """This element's pace against the earlier elements on the position that ran to the limit,
    from a forecast fitted to its own readings (not from lives alone)."""
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    if (
        forecast is None
        or forecast.to_limit is None
        or forecast.basis not in ("earlier-curves", "trend")
        or forecast.state not in ("ok", "check-now")
    ):
        return None
    lives = [
        life
        for el in past
        if (life := el.life_h()) is not None
        and life > 0
        and el.reached_limit(ctx.position.limit_bar)
    ]
    return trend.loading_pace(forecast.to_limit.likely_h, lives)


def filter_status(
    ctx: FilterContext,
    entries: Sequence[Entry],
    now: datetime,
    like: Sequence[tuple[float, bool]] = (),
) -> FilterStatus:
    """Status of one filter position from its live entries (time order, up to `now`)."""
    elements = split_elements(ctx, entries)
    past = [summarise(el) for el in elements[:-1]]
    return status_from(ctx, past, elements[-1], now, like)


def status_from(
    ctx: FilterContext,
    past: Sequence[ElementSummary],
    current: Element,
    now: datetime,
    like: Sequence[tuple[float, bool]] = (),
) -> FilterStatus:
    """Status from the summaries of the removed elements and the element in service (the
    derived element cache keeps the former, so a new reading costs only the latter)."""
    from store.forecast import anomaly, trend  # deferred: numpy/scipy load on first fit

    pos, unit = ctx.position, ctx.unit
    rate = hours_per_day([*past[-2:], current], now) if unit.hour_meter else None
    # A reading without the meter is aged at the unit's running rate, not in calendar hours.
    current = with_running_rate(current, unit.hour_meter, rate)
    points = current.points
    numeric = [p for p in points if p.dp_ref_bar is not None]
    last = points[-1] if points else None
    origin = current.fitted_at or (points[0].at if points else None)
    meter = None
    if rate and current.fitted_hours is not None:
        last_h = max([p.hours for p in points if p.hours is not None] or [current.fitted_hours])
        last_t = max([p.at for p in points if p.hours is not None] or [origin or now])
        meter = (last_t, last_h - current.fitted_hours, rate)
    newest = max((p.at for p in points), default=None)
    hot_since = min(now, newest) if newest else now
    clock = Clock(  # what moves with the clock; the forecast's parts are filled in below
        valid_from=hot_since if newest else None,
        origin=origin,
        meter=meter,
        due_ages=None,
        last_age_h=max((p.age_h for p in numeric), default=0.0),
        state="",
        check_after_h=None,
        life=None,
        hot=tuple(
            (p.at, p.temp_c)
            for p in points
            if p.temp_c is not None
            and p.temp_c > unit.max_temp_c
            and p.at >= hot_since - HOT_LOOKBACK
        ),
        max_temp_c=unit.max_temp_c,
    )
    age_now, age_to_time = clock.age_h(now), partial(clock.time_at, now=now)

    flags: list[str] = []
    notes: list[Note] = []
    fit, pooled = _life(ctx, past, like)
    life = None
    if fit is not None:
        life = LifeSummary(
            fit.age_at_fraction_h(0.10),
            fit.age_at_fraction_h(0.50),
            fit.n_failed,
            fit.n_censored,
            pooled=pooled,
        )

    forecast = None
    due = bypass_due = None
    basis, state = "none", "no-readings"
    if not pos.limit_bar or not pos.bypass_bar:
        state = "no-limits"
        flags.append("no-limits")
        notes.append(Note("no-limits"))
    if pos.limit_bar:
        readings = trend.ElementReadings(
            ages_h=tuple(p.age_h for p in numeric),
            dp_ref_bar=tuple(p.dp_ref_bar for p in numeric),  # type: ignore[misc]
        )
        last_age = max(readings.ages_h) if numeric else 0.0
        try:
            forecast = trend.forecast(
                readings,
                pos.clean_bar,
                pos.limit_bar,
                pos.bypass_bar,
                max(age_now, last_age),
                earlier=_past(ctx, past),
            )
        except BookError as exc:  # settings the forecast cannot use: say so, keep the rest
            forecast = None
            state = "no-forecast"
            notes.append(Note("no-forecast", {"error": str(exc)}))
        if forecast is not None:
            basis, state = forecast.basis, forecast.state
            note = Note("forecast", {"text": forecast.note})
            if state in ("ok", "check-now") and forecast.to_limit is not None:
                # check-now moves with the clock: keep the "ok" state, and the forecast's
                # sentence without the check-now words (`Note.text` adds them when due).
                at_h = clock.last_age_h
                words = NOTE_TEXT["check-now"].format(at_h=at_h)
                state = "ok"
                clock = replace(clock, check_after_h=forecast.to_limit.likely_h)
                note = Note("forecast", {"text": forecast.note.removesuffix(words), "at_h": at_h})
            if forecast.note:
                notes.append(note)
            due = _due(forecast.to_limit, age_to_time)
            bypass_due = _due(forecast.to_bypass, age_to_time)
            if clock.origin is None:  # dated from now: at_time dates them again
                clock = replace(clock, due_ages=(forecast.to_limit, forecast.to_bypass))
    pace = _pace(ctx, past, forecast)
    if pace is not None and pace.fast:
        flags.append("fast-loading")
        notes.append(Note("fast-loading", {"ratio": pace.ratio, "n": pace.n}))
    if (
        due is None
        and state in ("too-few-readings", "no-readings", "flat")
        and fit
        and pos.limit_bar
    ):
        basis = "service-life"
        b10 = fit.age_at_fraction_h(0.10)
        # Given it has lasted this long: the 5 %, 10 % (the planned change) and 50 % points
        # (at_time works them out for the age now).
        clock = replace(clock, life=(fit.shape, fit.scale_h))
        notes.append(Note("service-life", {"b10_h": b10}))
    if due is None and basis == "none" and not pos.gauge:
        basis = "interval"

    dp_ref = numeric[-1].dp_ref_bar if numeric else None
    percent = 100 * dp_ref / pos.limit_bar if dp_ref is not None and pos.limit_bar else None
    cold, cold_error = None, None
    if dp_ref is not None and pos.bypass_bar and ctx.curve and ctx.reference:
        try:
            cold = cold_start(
                dp_ref, pos.bypass_bar, unit.coldest_start_c, ctx.curve, ctx.reference
            )
        except BookError as exc:
            cold_error = str(exc)
    facts = rules.Facts(
        pos.limit_bar,
        pos.bypass_bar,
        unit.coldest_start_c,
        dp_ref,
        last,
        # In age order: a late entry or an hour meter read out of turn must not stop a save;
        # at one age, in logging order (the newest last, whatever its value).
        anomaly.age_ordered([(p.age_h, p.dp_ref_bar) for p in numeric]),
        percent,
        numeric[-1].age_h if numeric else None,
        cold,
        cold_error,
    )
    for rule in rules.READING_RULES:
        for flag, note in rule(facts):
            if flag:
                flags.append(flag)
            if note:
                notes.append(note)
    last_seen = max(
        [p.at for p in points] + ([current.fitted_at] if current.fitted_at else []), default=None
    )
    before = partial(_earliest_before, ctx, numeric, past, fit, clock)
    last_step = partial(_at_last_step, ctx, numeric, past)
    next_reading, next_rule = _next_reading(
        ctx, last_seen, due, basis, state, flags, fit, clock, before, last_step
    )
    # Overdue once the planned gap is passed by half again (a fixed interval: 1.5x it, as ever).
    overdue_at = None
    if last_seen and next_reading:
        overdue_at = last_seen + 1.5 * (next_reading - last_seen)
    clock = replace(clock, state=state)
    status = FilterStatus(
        filter=pos.tag,
        unit=pos.unit,
        kind=pos.kind,
        gauge=pos.gauge,
        dp_bar=last.dp_bar if last else None,
        dp_ref_bar=dp_ref,
        temp_c=last.temp_c if last else None,
        indicator=last.indicator if last else None,
        reading_at=last.at if last else None,
        limit_bar=pos.limit_bar,
        bypass_bar=pos.bypass_bar,
        clean_bar=pos.clean_bar,
        percent_of_limit=percent,
        due=due,
        bypass_due=bypass_due,
        basis=basis,
        state=state,
        flags=tuple(dict.fromkeys(flags)),
        notes=(),  # their words: at_time
        readings_since_change=len(points),
        changed_at=current.fitted_at,
        element_age_h=age_now,
        reference=ctx.reference.label if ctx.reference else ctx.problem,
        cold=cold,
        life=life,
        history=points,
        spark=tuple(p.dp_ref_bar for p in numeric[-40:]),  # type: ignore[misc]
        overdue_at=overdue_at,
        pace=None if pace is None else round(pace.ratio, 3),
        next_reading=next_reading,
        next_rule=next_rule,
        note_codes=tuple(notes),
        forecast=forecast,
        age_to_time=age_to_time,
    )
    return at_time(status, clock, now)


# A reading showed the element at or past its end: read it every shift until it is changed. (A
# ΔP drop asks for the element to be looked at, not for more readings: its own flag says so.)
_READ_EACH_SHIFT = ("over-limit", "at-bypass", "indicator-bypass", "indicator-dirty")


def _next_reading(
    ctx: FilterContext,
    last_seen: datetime | None,
    due: Due | None,
    basis: str,
    state: str,
    flags: Sequence[str],
    fit: WeibullFit | None,
    clock: Clock,
    before: Callable[[], datetime | None] = lambda: None,
    last_step: Callable[[], bool] = lambda: False,
) -> tuple[datetime | None, str]:
    """When to read the filter again and the rule that says so (store/forecast/readplan.py):
    READ_SHARE (two thirds) of the time from the last reading (or change) to the pessimistic
    date (the forecast's earliest date, or the service life's 5 % point given the age then),
    or to `before` (the same date as the previous reading had it, worked out only when
    needed) where that is sooner: a date moves later only once a second reading agrees;
    within the registered interval and the plant's shortest shift, the change visit where
    the share is under a shift. A gauge reading one step under the limit (`last_step`): the
    change at the forecast's earliest date as that reading gives it. None before anything was
    logged."""
    from store.forecast import readplan

    if last_seen is None:
        return None, ""
    warning_h: float | None = None
    rule = "forecast"
    at_step = False
    if state in ("past-limit", "past-bypass") or any(f in _READ_EACH_SHIFT for f in flags):
        warning_h = 0.0
    else:
        if due is not None and basis in ("earlier-curves", "trend"):
            until: datetime | None = due.earliest
            at_step = last_step()
        else:
            until = _life_earliest(fit, clock, last_seen) if basis == "service-life" else None
            rule = "service-life" if basis == "service-life" else rule
        if until is not None:
            if not at_step:
                until = readplan.pessimistic_date(until, before())
            warning_h = (until - last_seen).total_seconds() / 3600
    gap = readplan.bounded_gap(
        warning_h, ctx.position.reading_interval_h, ctx.shortest_read_h, rule, at_step
    )
    return last_seen + timedelta(hours=gap.gap_h), gap.rule


def _at_last_step(
    ctx: FilterContext, numeric: Sequence[Point], past: Sequence[ElementSummary]
) -> bool:
    """Whether the element's newest gauge reading is one gauge step under its change limit
    (readplan.at_last_step), the step being the one this position's readings (this element's
    and the earlier ones') are written to; none found (readings not on one step, normalised
    ones): False."""
    from store.forecast import anomaly, readplan  # deferred: numpy

    limit = ctx.position.limit_bar
    values = [p.dp_ref_bar for p in numeric if p.dp_ref_bar is not None]
    if not (limit and values):
        return False
    newest = max(numeric, key=lambda p: (p.age_h, p.at)).dp_ref_bar
    values += [v for el in past for v in el.dp_ref_bar]
    step = anomaly.gauge_step_bar(values)  # type: ignore[arg-type]
    return newest is not None and readplan.at_last_step(newest, limit, step)


def _life_earliest(fit: WeibullFit | None, clock: Clock, at: datetime) -> datetime | None:
    """The service life's pessimistic date given the element's age at `at`: when a share
    readplan.PESSIMISTIC_P of the elements that lasted that long reach the limit."""
    from store.forecast import readplan

    if fit is None:
        return None
    age_h = clock.age_h(at)
    ahead_h = readplan.life_warning_h(fit.shape, fit.scale_h, age_h)
    if age_h + ahead_h >= MAX_AGE_H:
        return None
    return clock.time_at(age_h + ahead_h, at)


def _earliest_before(
    ctx: FilterContext,
    numeric: Sequence[Point],
    past: Sequence[ElementSummary],
    fit: WeibullFit | None,
    clock: Clock,
) -> datetime | None:
    """The pessimistic date as it stood at the element's previous gauge reading: the forecast
    from the readings up to it, at its age (or the service life given that age, where the
    forecast had too few readings). From the entries alone, so the kept row and an as-of audit
    agree. None with fewer than two readings or where no date could be given then."""
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    pos = ctx.position
    if len(numeric) < 2 or not pos.limit_bar:
        return None
    ordered = sorted(numeric, key=lambda p: (p.age_h, p.at))
    earlier = ordered[:-1]
    then = earlier[-1]
    readings = trend.ElementReadings(
        ages_h=tuple(p.age_h for p in earlier),
        dp_ref_bar=tuple(p.dp_ref_bar for p in earlier),  # type: ignore[misc]
    )
    try:
        fc = trend.forecast(
            readings, pos.clean_bar, pos.limit_bar, pos.bypass_bar, then.age_h,
            earlier=_past(ctx, past),
        )  # fmt: skip
    except BookError:
        return None
    if fc.to_limit is not None and fc.basis in ("earlier-curves", "trend"):
        if fc.state not in ("ok", "check-now") or not fc.to_limit.earliest_h < MAX_AGE_H:
            return None
        return clock.time_at(fc.to_limit.earliest_h, then.at)
    if fc.state in ("too-few-readings", "no-readings", "flat"):
        return _life_earliest(fit, clock, then.at)
    return None


def status_as_of(book: Book, ctx: FilterContext, as_of: datetime) -> FilterStatus:
    """One filter's status as of a time, from every entry as it stood then (and like
    positions' lives). The status now, from the caches, is store.views.status_of."""
    now = as_of
    # An audit takes only what existed at that time, voided only by voids dated before it.
    until = now + timedelta(seconds=1)
    entries = [
        e for e in read(book, filter=ctx.position.tag, until=until, as_of=until) if not e.voided
    ]
    return filter_status(ctx, entries, now, like_lives(book, ctx, until))


def filters_as_of(
    book: Book,
    ctxs: Sequence[FilterContext],
    positions: Sequence[FilterPosition],
    now: datetime,
    kept: KeptSummaries | None = None,
) -> list[FilterStatus]:
    """`status_as_of(book, ctx, now)` of each of `ctxs` (`positions` being every position in
    the register): the same sums, from a few reads for the whole plant instead of three
    queries and an entry per reading for each position. `kept` (worked out by a layer that may
    read the element cache, store.derived.elementcache.kept_before, from `changes_as_of`)
    gives the summaries of elements taken out before `now` where they are provably what the
    entries give as they stood then, and where each position's entries must be read from;
    without it every history is read."""
    until = now + timedelta(seconds=1)
    changes, summaries, starts = kept or (live_changes_until(book, until), {}, {})
    starts = {c.position.tag.upper(): starts.get(c.position.tag.upper(), ("", 0)) for c in ctxs}
    whole = not summaries and len(ctxs) == len(positions)  # every history from its beginning
    items = element_items_until(book, until, None if whole else starts, changes)
    like = like_lives_all(live_changes(book, until), positions)
    out = []
    for ctx in ctxs:
        key = ctx.position.tag.upper()
        past, current = split_summaries(ctx, items.get(key, []))
        if key in summaries:
            past = summaries[key] + past[1:]  # the first ended with the change read from
        out.append(status_from(ctx, past, current, now, like[ctx.position.tag]))
    return out


def changes_as_of(book: Book, now: datetime) -> list[tuple[str, int, Entry]]:
    """The live element changes as the book stood at `now`: (at_utc, rowid, entry)."""
    return live_changes_until(book, now + timedelta(seconds=1))


# ---- the whole book ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Plant:
    """What a watch list covers: the filters (with their operating conditions), the units and
    each unit's filter positions, all of the plant or of one unit."""

    contexts: tuple[FilterContext, ...]
    units: tuple[Unit, ...]
    positions_by_unit: dict[str, list[FilterPosition]]


def plant(book: Book, unit: str | None = None) -> Plant:
    all_units, positions = list_all(book, Unit), list_all(book, FilterPosition)
    ctxs = [
        c
        for c in contexts_from(
            all_units, list_all(book, Fluid), positions, shortest_read_h(book)
        ).values()
        if unit is None or c.position.unit == unit
    ]
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in positions:
        by_unit.setdefault(position.unit.upper(), []).append(position)
    units = tuple(u for u in all_units if unit is None or u.tag == unit)
    return Plant(tuple(ctxs), units, by_unit)


def breathers_at(book: Book, now: datetime, unit: str | None = None) -> list[BreatherStatus]:
    """Every breather's status at `now` (of one unit), most urgent first."""
    until = now + timedelta(seconds=1)
    breathers = []
    all_swaps = breather_swaps(book, until)
    for b in list_all(book, Breather, unit):
        swaps = [e for e in all_swaps.get(b.tag.upper(), []) if not e.voided]
        breathers.append(_breather_status(b, swaps, now))
    breathers.sort(key=lambda s: s.urgency)
    return breathers


def watch_list(
    now: datetime,
    filters: list[FilterStatus],
    breathers: list[BreatherStatus],
    units: list[UnitStatus],
) -> Watch:
    filters.sort(key=lambda s: s.urgency)
    return Watch(now, tuple(filters), tuple(breathers), tuple(units))


# (live changes as of a time, element summaries kept by upper-case tag, where each
# position's entries are read from): what filters_as_of may start from
KeptSummaries = tuple[
    Sequence[tuple[str, int, Entry]],
    dict[str, list[ElementSummary]],
    dict[str, tuple[str, int]],
]


def watch_as_of(book: Book, as_of: datetime, unit: str | None = None) -> Watch:
    """The watch list as of a past time, computed from the entries as they stood then,
    nothing kept read (store.views.watch uses the kept rows that hold then)."""
    p = plant(book, unit)
    positions = list_all(book, FilterPosition)
    filters = filters_as_of(book, p.contexts, positions, as_of)
    units = [
        unit_status(book, u, p.positions_by_unit.get(u.tag.upper(), []), as_of) for u in p.units
    ]
    return watch_list(as_of, filters, breathers_at(book, as_of, unit), units)


def _breather_status(breather: Breather, swaps: Sequence[Entry], now: datetime) -> BreatherStatus:
    forecast = breather_forecast(breather, swaps, now)  # type: ignore[arg-type]
    flags = []
    if forecast.overdue:
        flags.append("swap-overdue")
    fraction = spent_fraction(forecast.last_condition) if forecast.last_condition else None
    if fraction is not None and fraction >= 0.99:
        flags.append("desiccant-spent")
    return BreatherStatus(breather.tag, breather.unit, breather.kind, forecast, tuple(flags))


TOPUP_WINDOW = timedelta(days=30)  # a top-up's filtration is flagged this long


@dataclass(frozen=True)
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

    @classmethod
    def from_row(cls, row: dict[str, Any], unit: str) -> UnitClock:
        return cls(
            valid_from=parse_stamp(row["valid_from"]),
            first_at=_moment(row["first_at"]),
            early_l=row["early_l"],
            early_n=row["early_n"],
            topups=tuple(
                TopUp(id=i, at=parse_stamp(at), unit=unit, volume_l=v, filtered_um=um, hours=h)
                for i, at, v, um, h in row["topups"]
            ),
            sample=tuple(row["sample"]) if row["sample"] else None,  # type: ignore[arg-type]
            hot=tuple(parse_stamp(at) for at in row["hot"]),
            water_ppm=row["water_ppm"],
        )


def unit_clock(book: Book, unit: Unit, now: datetime) -> UnitClock:
    """A unit's fluid-care entries as they stand at `now`."""
    until = now + timedelta(seconds=1)
    topups = [
        e
        for e in read(book, unit=unit.tag, kinds=["topup"], until=until, as_of=until)
        if not e.voided
    ]
    first = read(book, unit=unit.tag, until=until, limit=1)
    early = [t for t in topups if t.at < now - TOPUP_WINDOW]  # type: ignore[operator]
    early_l = 0  # as topup_consumption adds them up
    for t in early:
        early_l += t.volume_l  # type: ignore[attr-defined]
    newest = [
        e
        for e in read(
            book,
            unit=unit.tag,
            kinds=["sample"],
            until=until,
            as_of=until,
            newest_first=True,
            limit=5,
        )
        if not e.voided
    ]
    samples = [e for e in newest if e.code]  # type: ignore[attr-defined]
    water = next((e.water_ppm for e in newest if e.water_ppm is not None), None)  # type: ignore[attr-defined]
    sample = None
    if samples:
        verdict = sample_verdict(unit, samples[0])  # type: ignore[arg-type]
        sample = (verdict.code, verdict.text, verdict.meets)
    recent = [
        e
        for e in read(
            book,
            unit=unit.tag,
            kinds=["reading"],
            since=now - HOT_LOOKBACK,
            until=until,
            as_of=until,
        )
        if not e.voided
    ]
    return UnitClock(
        valid_from=now,
        first_at=first[0].at if first else None,
        early_l=early_l,
        early_n=len(early),
        topups=tuple(topups[len(early) :]),  # type: ignore[arg-type]
        sample=sample,
        hot=tuple(r.at for r in hot_readings(unit, recent)),  # type: ignore[arg-type, misc]
        water_ppm=water,
    )


def new_element_high(percent_of_limit: float | None, age_h: float) -> str | None:
    """The note of the new-element flag for the latest reading's share of the change limit at
    element age `age_h`, None when the element is older or still low."""
    note = rules.young_high(percent_of_limit, age_h)
    return None if note is None else note.text("")


# Water in mineral hydraulic oil above about 300 ppm is past what the oil holds dissolved near
# its working temperature: free water, rust, additive loss. # from memory (a usual alarm level;
# the fluid maker's figure rules)
WATER_LIMIT_PPM = 300.0


def water_flag(water_ppm: float | None) -> str | None:
    """The note of the water flag for the newest sample's water content, None under the limit."""
    if water_ppm is None or water_ppm <= WATER_LIMIT_PPM:
        return None
    return (
        f"latest sample holds {water_ppm:g} ppm water (over {WATER_LIMIT_PPM:g} ppm): find "
        "where it gets in (breather, seals, cooler, washdown) and dry or change the oil"
    )


def unit_at(
    unit: Unit, filters: Sequence[FilterPosition], clock: UnitClock, now: datetime
) -> UnitStatus:
    """A unit's status at `now` (not before `clock.valid_from`): the windows of top-up use,
    top-up filtration and hot readings laid over its kept entries."""
    flags: list[str] = []
    notes: list[str] = []
    consumption = topup_consumption(
        unit, clock.topups, now, clock.first_at, clock.early_l, clock.early_n
    )
    if consumption and consumption.rising:
        flags.append("leak-suspect")
        notes.append(f"fluid use is rising: {consumption.note}; look for a leak (never by hand)")
    for t in clock.topups:
        if t.at and now - t.at <= TOPUP_WINDOW:
            problem = topup_filtration_problem(t, filters)
            if problem:
                flags.append("unfiltered-topup" if t.filtered_um is None else "coarse-topup")
                notes.append(problem)
    code = sample_text = None
    if clock.sample:
        code, sample_text, meets = clock.sample
        if meets is False:
            flags.append("over-target")
            notes.append(f"latest sample {sample_text}")
    if (water := water_flag(clock.water_ppm)) is not None:
        flags.append("water-high")
        notes.append(water)
    if any(now - at <= HOT_LOOKBACK for at in clock.hot):
        flags.append("hot")
    return UnitStatus(
        unit.tag,
        unit.name,
        unit.area,
        consumption,
        code,
        unit.target_code,
        sample_text or "",
        tuple(dict.fromkeys(flags)),
        tuple(notes),
    )


def unit_status(
    book: Book, unit: Unit, filters: Sequence[FilterPosition], now: datetime
) -> UnitStatus:
    """A unit's fluid care: top-up use, top-up filtration, latest sample, hot readings."""
    return unit_at(unit, filters, unit_clock(book, unit, now), now)
