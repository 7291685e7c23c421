"""Element histories: the book's readings and changes of one filter position, cut into elements.

An element's life runs from one element change to the next. Its age is counted in
operating hours where the unit has an hour meter and the entries carry it, otherwise
in calendar hours. An element changed because it reached its limit (reason limit,
indicator or bypass, or a last reading at the limit) is a "failure" for the life
statistics; one taken out earlier is right-censored.
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence
from dataclasses import field
from datetime import datetime

from store.base.records import frozen_record
from store.health.conditions import FilterContext, dp_ref_bar
from store.ledger.entries import ElementChange, Entry, Reading

REACHED_REASONS = ("limit", "indicator", "bypass")


@frozen_record
class Point:
    """One reading of an element, at its age."""

    at: datetime
    age_h: float
    dp_bar: float | None
    dp_ref_bar: float | None
    temp_c: float | None
    indicator: str | None
    flow_lpm: float | None
    hours: float | None
    entry_id: str


@frozen_record
class Element:
    """One element's time on the housing."""

    fitted_at: datetime | None  # None: fitted before the book began
    fitted_hours: float | None
    removed_at: datetime | None  # None: still in service
    removal: ElementChange | None
    points: tuple[Point, ...] = field(default=())
    uses_hours: bool = False

    def reached_limit(self, limit_bar: float | None) -> bool:
        if self.removal is None:
            return False
        if self.removal.reason in REACHED_REASONS:
            return True
        last = [p.dp_ref_bar for p in self.points if p.dp_ref_bar is not None][-1:]
        return bool(limit_bar and last and last[0] >= limit_bar)

    def life_h(self) -> float | None:
        """Hours in service, for removed elements whose fitting time is known."""
        if self.removal is None or self.fitted_at is None:
            return None
        if self.uses_hours and self.removal.hours is not None and self.fitted_hours is not None:
            return max(self.removal.hours - self.fitted_hours, 0.0)
        return (self.removal.at - self.fitted_at).total_seconds() / 3600  # type: ignore[operator]


def meter_at(
    pairs: Sequence[tuple[datetime, float]], at: datetime, rate_h_per_day: float | None = None
) -> float | None:
    """The hour meter at a time from (time, meter) pairs of one unit.

    Between two pairs: in proportion to calendar time. Beyond them: at rate_h_per_day, or at
    the rate of the pairs' own span when that covers a day or more. None when neither is known.
    """
    return _meter_at_sorted(sorted(pairs), at, rate_h_per_day)


def _meter_at_sorted(
    pts: Sequence[tuple[datetime, float]], at: datetime, rate_h_per_day: float | None
) -> float | None:
    if not pts:
        return None
    i = bisect.bisect_left(pts, at, key=lambda p: p[0])
    if i < len(pts) and pts[i][0] == at:
        return pts[i][1]
    if 0 < i < len(pts):
        (t0, h0), (t1, h1) = pts[i - 1], pts[i]
        return h0 + (h1 - h0) * (at - t0).total_seconds() / (t1 - t0).total_seconds()
    rate = rate_h_per_day
    if rate is None and len(pts) >= 2:
        days = (pts[-1][0] - pts[0][0]).total_seconds() / 86400
        if days >= 1 and pts[-1][1] > pts[0][1]:
            rate = min((pts[-1][1] - pts[0][1]) / days, 24.0)
    if rate is None:
        return None
    if i == len(pts):
        return pts[-1][1] + rate * (at - pts[-1][0]).total_seconds() / 86400
    return max(pts[0][1] - rate * (pts[0][0] - at).total_seconds() / 86400, 0.0)


def _age_h(
    at: datetime,
    hours: float | None,
    start: datetime | None,
    start_hours: float | None,
    uses_hours: bool,
    pairs: Sequence[tuple[datetime, float]] = (),
    rate_h_per_day: float | None = None,
) -> float:
    if uses_hours and start_hours is not None:
        if hours is None:  # no meter on this reading: estimated from the element's meter pairs
            hours = _meter_at_sorted(pairs, at, rate_h_per_day)
        if hours is not None:
            return max(hours - start_hours, 0.0)
    if start is None:
        return 0.0
    return max((at - start).total_seconds() / 3600, 0.0)


# A reading as splitting needs it: (at, hours, dp_bar, temp_c, indicator, flow_lpm, entry id).
ReadingValues = tuple[datetime, float | None, float | None, float | None, str | None,
                      float | None, str]  # fmt: skip


def _aging(
    fitted_at: datetime | None,
    fitted_hours: float | None,
    removal: ElementChange | None,
    readings: Sequence[tuple[ReadingValues, float | None]],
    hour_meter: bool,
    rate_h_per_day: float | None = None,
) -> tuple[datetime | None, float | None, bool, list[tuple[datetime, float]]]:
    """Where an element's ages count from, whether in operating hours, and the element's
    (time, meter) pairs. Operating hours where the unit has a meter, the start and the removal
    carry it, and every reading either carries it or can be estimated from the pairs (between
    them, or beyond them at the running rate)."""
    origin = fitted_at or (readings[0][0][0] if readings else None)
    origin_hours = fitted_hours if fitted_at else (readings[0][0][1] if readings else None)
    pairs = [(r[0], r[1]) for r, _ in readings if r[1] is not None]
    if origin is not None and origin_hours is not None:
        pairs.append((origin, origin_hours))
    if removal is not None and removal.hours is not None:
        pairs.append((removal.at, removal.hours))
    pairs.sort()
    uses_hours = (
        hour_meter
        and origin_hours is not None
        and (removal is None or removal.hours is not None)
        and all(
            r[1] is not None or _meter_at_sorted(pairs, r[0], rate_h_per_day) is not None
            for r, _ in readings
        )
    )
    return origin, origin_hours, bool(uses_hours), pairs


def _element(
    fitted_at: datetime | None,
    fitted_hours: float | None,
    removal: ElementChange | None,
    readings: Sequence[tuple[ReadingValues, float | None]],
    hour_meter: bool,
    rate_h_per_day: float | None = None,
) -> Element:
    """One element with its points."""
    origin, origin_hours, uses_hours, pairs = _aging(
        fitted_at, fitted_hours, removal, readings, hour_meter, rate_h_per_day
    )
    points = tuple(
        Point(
            at,
            _age_h(at, hours, origin, origin_hours, uses_hours, pairs, rate_h_per_day),
            dp_bar,
            dp_ref,
            temp_c,
            indicator,
            flow_lpm,
            hours,
            entry_id,
        )
        for (at, hours, dp_bar, temp_c, indicator, flow_lpm, entry_id), dp_ref in readings
    )
    return Element(
        fitted_at, fitted_hours, removal.at if removal else None, removal, points, uses_hours
    )


def with_running_rate(el: Element, hour_meter: bool, rate_h_per_day: float | None) -> Element:
    """The element aged in operating hours with the unit's running rate for readings without a
    meter value beyond its own meter readings (itself where it needs no estimate or none can
    be made)."""
    if el.uses_hours or not hour_meter or rate_h_per_day is None or not el.points:
        return el
    readings = [
        ((p.at, p.hours, p.dp_bar, p.temp_c, p.indicator, p.flow_lpm, p.entry_id), p.dp_ref_bar)
        for p in el.points
    ]
    return _element(el.fitted_at, el.fitted_hours, el.removal, readings, hour_meter, rate_h_per_day)


def _summary(
    fitted_at: datetime | None,
    fitted_hours: float | None,
    removal: ElementChange,
    readings: Sequence[tuple[ReadingValues, float | None]],
    hour_meter: bool,
) -> ElementSummary:
    """`summarise(_element(...))` without making a point per reading."""
    origin, origin_hours, uses_hours, meter = _aging(
        fitted_at, fitted_hours, removal, readings, hour_meter
    )
    ages, dps = [], []
    for r, dp_ref in readings:
        if dp_ref is not None:
            ages.append(_age_h(r[0], r[1], origin, origin_hours, uses_hours, meter))
            dps.append(dp_ref)
    pairs = [(r[0], r[1]) for r, _ in readings if r[1] is not None]
    return ElementSummary(
        fitted_at=fitted_at,
        fitted_hours=fitted_hours,
        removed_at=removal.at,  # type: ignore[arg-type]
        removal_id=removal.id,
        reason=removal.reason,
        condition=removal.condition,
        batch=removal.batch,
        removal_hours=removal.hours,
        uses_hours=uses_hours,
        readings=len(readings),
        ages_h=tuple(ages),
        dp_ref_bar=tuple(dps),
        hour_readings=len(pairs),
        first_hours=min(pairs) if pairs else None,  # type: ignore[type-var]
        last_hours=max(pairs) if pairs else None,  # type: ignore[type-var]
    )


def split_elements(ctx: FilterContext, entries: Sequence[Entry]) -> list[Element]:
    """Cut a position's live entries (time order, voids removed) into elements.

    An element fitted before the book began is aged from its first reading.
    """
    items: list[ElementChange | ReadingValues] = []
    for e in entries:
        if e.voided:
            continue
        if isinstance(e, Reading):
            items.append((e.at, e.hours, e.dp_bar, e.temp_c, e.indicator, e.flow_lpm, e.id))  # type: ignore[arg-type]
        elif isinstance(e, ElementChange):
            items.append(e)
    return split_values(ctx, items)


_Group = tuple[
    datetime | None, float | None, ElementChange | None, list[tuple[ReadingValues, float | None]]
]


def _groups(ctx: FilterContext, items: Sequence[ElementChange | ReadingValues]) -> list[_Group]:
    """(fitted at, fitted meter, removal, readings with their reference ΔP) per element."""
    groups: list[_Group] = []
    start: datetime | None = None
    start_hours: float | None = None
    readings: list[tuple[ReadingValues, float | None]] = []
    for item in items:
        if isinstance(item, ElementChange):
            groups.append((start, start_hours, item, readings))
            start, start_hours, readings = item.at, item.hours, []
        else:
            readings.append((item, dp_ref_bar(ctx, item[2], item[3], item[5])))
    groups.append((start, start_hours, None, readings))
    return groups


def split_values(
    ctx: FilterContext, items: Sequence[ElementChange | ReadingValues]
) -> list[Element]:
    """`split_elements` over live changes and reading values in time order (what
    `journal.element_items` reads without building an entry per reading)."""
    return [_element(*group, ctx.unit.hour_meter) for group in _groups(ctx, items)]


def split_summaries(
    ctx: FilterContext, items: Sequence[ElementChange | ReadingValues]
) -> tuple[list[ElementSummary], Element]:
    """The removed elements' summaries and the element in service, from the same items as
    `split_values` (the same as summarising its elements, with less work)."""
    groups = _groups(ctx, items)
    hour_meter = ctx.unit.hour_meter
    past = [_summary(*group, hour_meter) for group in groups[:-1]]  # type: ignore[arg-type]
    return past, _element(*groups[-1], hour_meter)


@frozen_record
class ElementSummary:
    """What the status needs of an element that has been taken out: kept in the derived
    element cache so that a status never rereads the history of earlier elements.

    `summarise(el)` gives it for any removed `Element`; its `life_h`, `reached_limit` and
    `hour_span` answer exactly as the element's own.
    """

    fitted_at: datetime | None
    fitted_hours: float | None
    removed_at: datetime
    removal_id: str
    reason: str
    condition: str
    batch: str
    removal_hours: float | None
    uses_hours: bool
    readings: int  # every reading, indicator-only ones included
    ages_h: tuple[float, ...]  # the readings with a reference ΔP: element age (h) ...
    dp_ref_bar: tuple[float, ...]  # ... and reference ΔP (bar)
    hour_readings: int  # readings that carry the hour meter
    first_hours: tuple[datetime, float] | None  # smallest (time, meter) of those
    last_hours: tuple[datetime, float] | None  # largest (time, meter) of those

    def reached_limit(self, limit_bar: float | None) -> bool:
        if self.reason in REACHED_REASONS:
            return True
        return bool(limit_bar and self.dp_ref_bar and self.dp_ref_bar[-1] >= limit_bar)

    def life_h(self) -> float | None:
        if self.fitted_at is None:
            return None
        if self.uses_hours and self.removal_hours is not None and self.fitted_hours is not None:
            return max(self.removal_hours - self.fitted_hours, 0.0)
        return (self.removed_at - self.fitted_at).total_seconds() / 3600

    @property
    def peak_dp_ref_bar(self) -> float | None:
        return max(self.dp_ref_bar) if self.dp_ref_bar else None

    def hour_span(self) -> tuple[int, tuple[datetime, float] | None, tuple[datetime, float] | None]:
        return self.hour_readings, self.first_hours, self.last_hours

    def removal_pair(self) -> tuple[datetime, float] | None:
        return None if self.removal_hours is None else (self.removed_at, self.removal_hours)


def summarise(el: Element) -> ElementSummary:
    """The summary of a removed element."""
    if el.removal is None or el.removed_at is None:
        raise ValueError("only an element that has been taken out has a summary")
    numeric = [p for p in el.points if p.dp_ref_bar is not None]
    count, first, last = _hour_span(el)
    return ElementSummary(
        fitted_at=el.fitted_at,
        fitted_hours=el.fitted_hours,
        removed_at=el.removed_at,
        removal_id=el.removal.id,
        reason=el.removal.reason,
        condition=el.removal.condition,
        batch=el.removal.batch,
        removal_hours=el.removal.hours,
        uses_hours=el.uses_hours,
        readings=len(el.points),
        ages_h=tuple(p.age_h for p in numeric),
        dp_ref_bar=tuple(p.dp_ref_bar for p in numeric),  # type: ignore[misc]
        hour_readings=count,
        first_hours=first,
        last_hours=last,
    )


def _hour_span(
    el: Element,
) -> tuple[int, tuple[datetime, float] | None, tuple[datetime, float] | None]:
    pairs = [(p.at, p.hours) for p in el.points if p.hours is not None]
    if not pairs:
        return 0, None, None
    return len(pairs), min(pairs), max(pairs)  # type: ignore[type-var, return-value]


def hours_per_day(elements: Sequence[Element | ElementSummary], now: datetime) -> float | None:
    """Recent operating hours per calendar day from hour-meter readings (None if unknown).

    From the first and the last (time, meter) pair of the last three elements, removals
    included."""
    count = 0
    ends: list[tuple[datetime, float]] = []
    for el in elements[-3:]:
        if isinstance(el, ElementSummary):
            n, first, last = el.hour_span()
            removal = el.removal_pair()
        else:
            n, first, last = _hour_span(el)
            removal = (
                (el.removal.at, el.removal.hours)  # type: ignore[assignment]
                if el.removal is not None and el.removal.hours is not None
                else None
            )
        count += n + (removal is not None)
        ends += [pair for pair in (first, last, removal) if pair is not None]
    if count < 2:
        return None
    (t0, h0), (t1, h1) = min(ends), max(ends)
    days = (t1 - t0).total_seconds() / 86400
    if days < 1 or h1 <= h0:
        return None
    return min((h1 - h0) / days, 24.0)
