"""Element histories: the book's readings and changes of one filter position, cut into elements.

An element's life runs from one element change to the next. Its age is counted in
operating hours where the unit has an hour meter and the entries carry it, otherwise
in calendar hours. An element changed because it reached its limit (reason limit,
indicator or bypass, or a last reading at the limit) is a "failure" for the life
statistics; one taken out earlier is right-censored.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from .conditions import FilterContext, normalise
from .entries import ElementChange, Entry, Reading

REACHED_REASONS = ("limit", "indicator", "bypass")


@dataclass(frozen=True)
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


@dataclass(frozen=True)
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


def _age_h(
    at: datetime,
    hours: float | None,
    start: datetime | None,
    start_hours: float | None,
    uses_hours: bool,
) -> float:
    if uses_hours and hours is not None and start_hours is not None:
        return max(hours - start_hours, 0.0)
    if start is None:
        return 0.0
    return max((at - start).total_seconds() / 3600, 0.0)


def _element(fitted_at: datetime | None, fitted_hours: float | None, removal: ElementChange | None,
             readings: Sequence[tuple[Reading, Any]], hour_meter: bool) -> Element:
    """One element with its points aged in operating hours only where every one can be."""
    origin = fitted_at or (readings[0][0].at if readings else None)
    origin_hours = fitted_hours if fitted_at else (readings[0][0].hours if readings else None)
    uses_hours = (hour_meter and origin_hours is not None
                  and all(r.hours is not None for r, _ in readings)
                  and (removal is None or removal.hours is not None))
    points = tuple(
        Point(r.at, _age_h(r.at, r.hours, origin, origin_hours, uses_hours),  # type: ignore[arg-type]
              r.dp_bar, n.dp_ref_bar, r.temp_c, r.indicator, r.flow_lpm, r.hours, r.id)
        for r, n in readings
    )
    return Element(fitted_at, fitted_hours, removal.at if removal else None, removal, points,
                   uses_hours)


def split_elements(ctx: FilterContext, entries: Sequence[Entry]) -> list[Element]:
    """Cut a position's live entries (time order, voids removed) into elements.

    An element fitted before the book began is aged from its first reading.
    """
    elements: list[Element] = []
    start: datetime | None = None
    start_hours: float | None = None
    readings: list[tuple[Reading, Any]] = []
    for e in entries:
        if e.voided:
            continue
        if isinstance(e, Reading):
            readings.append((e, normalise(ctx, e)))
        elif isinstance(e, ElementChange):
            elements.append(_element(start, start_hours, e, readings, ctx.unit.hour_meter))
            start, start_hours, readings = e.at, e.hours, []
    elements.append(_element(start, start_hours, None, readings, ctx.unit.hour_meter))
    return elements


def hours_per_day(elements: Sequence[Element], now: datetime) -> float | None:
    """Recent operating hours per calendar day from hour-meter readings (None if unknown)."""
    pairs = [(p.at, p.hours) for el in elements[-3:] for p in el.points if p.hours is not None]
    pairs += [
        (el.removal.at, el.removal.hours)
        for el in elements[-3:]
        if el.removal is not None and el.removal.hours is not None
    ]
    pairs.sort()
    if len(pairs) < 2:
        return None
    (t0, h0), (t1, h1) = pairs[0], pairs[-1]
    days = (t1 - t0).total_seconds() / 86400
    if days < 1 or h1 <= h0:  # type: ignore[operator]
        return None
    return min((h1 - h0) / days, 24.0)  # type: ignore[operator]
