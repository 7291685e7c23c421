"""What computes a filter's status: `status_from`, from the summaries of the removed elements
and the element in service (the derived element cache keeps the former, so a new reading
costs only the latter), and `filter_status`, from the position's entries.

It works out the element's `Clock`, asks the forecast for its dates, runs the flag rules of
store/health/rules.py in the order of the flags, plans the next reading
(store/health/next_reading.py) and ends with `status_model.at_time`. The records and the kept
rows are store/health/status_model.py. The fitting maths (numpy, scipy) load on the first
computation: a watch list read from the status cache needs none of it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from datetime import datetime
from functools import partial
from typing import TYPE_CHECKING, NamedTuple

from store.base.errors import BookError
from store.health import rules
from store.health.conditions import FilterContext
from store.health.earlier import LikeLives, life_fit, pace, past_curves
from store.health.elements import (
    Element,
    ElementSummary,
    Point,
    hours_per_day,
    split_elements,
    summarise,
    with_running_rate,
)
from store.health.next_reading import Plan, plan
from store.health.notes import NOTE_TEXT, Note
from store.health.status_model import (
    HOT_LOOKBACK,
    Clock,
    Due,
    FilterStatus,
    LifeSummary,
    at_time,
    due_of,
)
from store.ledger.entries import Entry
from store.physics.normalise import cold_start

if TYPE_CHECKING:
    from store.forecast import trend
    from store.forecast.life import WeibullFit


def filter_status(
    ctx: FilterContext,
    entries: Sequence[Entry],
    now: datetime,
    like: LikeLives = (),
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
    like: LikeLives = (),
    kept_plan: Plan | None = None,
) -> FilterStatus:
    """Status from the summaries of the removed elements and the element in service.
    `kept_plan`: the next reading as a kept status row of the same inputs holds it (what
    `plan` would work out again: a second forecast, at the reading before the newest)."""
    pos, unit = ctx.position, ctx.unit
    rate = hours_per_day([*past[-2:], current], now) if unit.hour_meter else None
    # A reading without the meter is aged at the unit's running rate, not in calendar hours.
    current = with_running_rate(current, unit.hour_meter, rate)
    points = current.points
    numeric = [p for p in points if p.dp_ref_bar is not None]
    last = points[-1] if points else None
    clock = _clock(ctx, current, numeric, rate, now)
    age_to_time = partial(clock.time_at, now=now)

    flags: list[str] = []
    notes: list[Note] = []
    fit, pooled = life_fit(ctx, past, like)
    state = "no-readings"
    if _take(rules.no_limits(pos.limit_bar, pos.bypass_bar), flags, notes):
        state = "no-limits"
    said = _Said(None, "none", state, None, None, clock, None)
    if pos.limit_bar:
        said = _forecast(ctx, past, numeric, clock, now, state)
    forecast, basis, state, due, bypass_due, clock, note = said
    if note is not None:
        notes.append(note)
    element_pace = pace(ctx, past, forecast)
    _take(rules.fast_loading(element_pace), flags, notes)
    if fit is not None and _take(
        rules.service_life(due is not None, state, fit, pos.limit_bar), flags, notes
    ):
        basis = "service-life"
        # Given it has lasted this long: the 5 %, 10 % (the planned change) and 50 % points
        # (at_time works them out for the age now).
        clock = replace(clock, life=(fit.shape, fit.scale_h))
    if due is None and basis == "none" and not pos.gauge:
        basis = "interval"
    facts = _facts(ctx, numeric, last)
    for rule in rules.READING_RULES:
        _take(rule(facts), flags, notes)
    next_reading = kept_plan
    if next_reading is None:
        next_reading = plan(ctx, current, numeric, past, fit, clock, due, basis, state, flags)
    clock = replace(clock, state=state)
    status = FilterStatus(
        filter=pos.tag,
        unit=pos.unit,
        kind=pos.kind,
        gauge=pos.gauge,
        dp_bar=last.dp_bar if last else None,
        dp_ref_bar=facts.dp_ref_bar,
        temp_c=last.temp_c if last else None,
        indicator=last.indicator if last else None,
        reading_at=last.at if last else None,
        limit_bar=pos.limit_bar,
        bypass_bar=pos.bypass_bar,
        clean_bar=pos.clean_bar,
        percent_of_limit=facts.percent_of_limit,
        due=due,
        bypass_due=bypass_due,
        basis=basis,
        state=state,
        flags=tuple(dict.fromkeys(flags)),
        notes=(),  # their words: at_time
        readings_since_change=len(points),
        changed_at=current.fitted_at,
        element_age_h=clock.age_h(now),
        reference=ctx.reference.label if ctx.reference else ctx.problem,
        cold=facts.cold,
        life=None if fit is None else _life_summary(fit, pooled),
        history=points,
        spark=tuple(p.dp_ref_bar for p in numeric[-40:]),  # type: ignore[misc]
        overdue_at=next_reading.overdue_at,
        pace=None if element_pace is None else round(element_pace.ratio, 3),
        next_reading=next_reading.at,
        next_rule=next_reading.rule,
        note_codes=tuple(notes),
        forecast=forecast,
        age_to_time=age_to_time,
    )
    return at_time(status, clock, now)


def _life_summary(fit: WeibullFit, pooled: bool) -> LifeSummary:
    return LifeSummary(
        fit.age_at_fraction_h(0.10),
        fit.age_at_fraction_h(0.50),
        fit.n_failed,
        fit.n_censored,
        pooled=pooled,
    )


def _take(found: rules.Found, flags: list[str], notes: list[Note]) -> bool:
    """Add a rule's flags and notes to the status's; whether it found anything."""
    for flag, note in found:
        if flag:
            flags.append(flag)
        if note:
            notes.append(note)
    return bool(found)


def _clock(
    ctx: FilterContext,
    current: Element,
    numeric: Sequence[Point],
    rate: float | None,
    now: datetime,
) -> Clock:
    """What moves with the clock, from the element in service; the forecast's parts (due
    ages, check-now, service life) and the state are filled in by status_from."""
    unit, points = ctx.unit, current.points
    origin = current.fitted_at or (points[0].at if points else None)
    meter = None
    if rate and current.fitted_hours is not None:
        last_h = max([p.hours for p in points if p.hours is not None] or [current.fitted_hours])
        last_t = max([p.at for p in points if p.hours is not None] or [origin or now])
        meter = (last_t, last_h - current.fitted_hours, rate)
    newest = max((p.at for p in points), default=None)
    hot_since = min(now, newest) if newest else now
    return Clock(
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


class _Said(NamedTuple):
    """What the forecast says of the element in service."""

    forecast: trend.Forecast | None
    basis: str
    state: str
    due: Due | None
    bypass_due: Due | None
    clock: Clock
    note: Note | None  # its sentence, or why there is none


def _forecast(
    ctx: FilterContext,
    past: Sequence[ElementSummary],
    numeric: Sequence[Point],
    clock: Clock,
    now: datetime,
    state: str,
) -> _Said:
    """The forecast of a position with a change limit, from the gauge readings of the element
    in service and the earlier elements' curves; `state` stands where it gives none."""
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    pos = ctx.position
    age_to_time = partial(clock.time_at, now=now)
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
            max(clock.age_h(now), last_age),
            earlier=past_curves(ctx, past),
        )
    except BookError as exc:  # settings the forecast cannot use: say so, keep the rest
        note = Note("no-forecast", {"error": str(exc)})
        return _Said(None, "none", "no-forecast", None, None, clock, note)
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
    due = due_of(forecast.to_limit, age_to_time)
    bypass_due = due_of(forecast.to_bypass, age_to_time)
    if clock.origin is None:  # dated from now: at_time dates them again
        clock = replace(clock, due_ages=(forecast.to_limit, forecast.to_bypass))
    return _Said(forecast, basis, state, due, bypass_due, clock, note if forecast.note else None)


def _facts(ctx: FilterContext, numeric: Sequence[Point], last: Point | None) -> rules.Facts:
    """What the readings of the element in service show, for the reading rules."""
    from store.forecast import anomaly  # deferred: numpy/scipy load on first fit

    pos, unit = ctx.position, ctx.unit
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
    return rules.Facts(
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


def new_element_high(percent_of_limit: float | None, age_h: float) -> str | None:
    """The note of the new-element flag for the latest reading's share of the change limit at
    element age `age_h`, None when the element is older or still low."""
    note = rules.young_high(percent_of_limit, age_h)
    return None if note is None else note.text("")
