"""When to read a filter again: the glue between a computed status and the rule of
store/forecast/readplan.py. `plan` gives the next reading's time, the rule that set it and
when the reading becomes overdue, from the last reading (or change), the forecast's
earliest date or the service life, and the pessimistic date as the previous gauge reading
had it (`_earliest_before`, from the entries alone, so the kept row and an as-of audit
agree). The plan is kept in the status row: it does not move with the clock."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from datetime import datetime, timedelta
from functools import partial
from typing import TYPE_CHECKING, NamedTuple

from store.base.errors import BookError
from store.health.conditions import FilterContext
from store.health.earlier import past_curves
from store.health.elements import Element, ElementSummary, Point
from store.health.status_model import MAX_AGE_H, Clock, Due

if TYPE_CHECKING:
    from store.forecast.life import WeibullFit


class Plan(NamedTuple):
    at: datetime | None  # read again by then (None before anything was logged)
    rule: str  # what set it: readplan.RULES
    overdue_at: datetime | None  # when the reading becomes overdue


def plan(
    ctx: FilterContext,
    current: Element,
    numeric: Sequence[Point],
    past: Sequence[ElementSummary],
    fit: WeibullFit | None,
    clock: Clock,
    due: Due | None,
    basis: str,
    state: str,
    flags: Sequence[str],
) -> Plan:
    """The next reading of the element in service (`numeric`: its gauge readings) given its
    status (due, basis, state, flags so far), and when that reading becomes overdue."""
    points = current.points
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
    return Plan(next_reading, next_rule, overdue_at)


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
            earlier=past_curves(ctx, past),
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
