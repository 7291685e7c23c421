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


def split_elements(ctx: FilterContext, entries: Sequence[Entry]) -> list[Element]:
    """Cut a position's live entries (time order, voids removed) into elements."""
    uses_hours = ctx.unit.hour_meter
    elements: list[Element] = []
    start: datetime | None = None
    start_hours: float | None = None
    points: list[Point] = []
    origin: datetime | None = None
    origin_hours: float | None = None
    for e in entries:
        if e.voided:
            continue
        if isinstance(e, Reading):
            n = normalise(ctx, e)
            if start is None and not points:  # fitted before the book began: age from here
                origin, origin_hours = e.at, e.hours
            elif start is not None:
                origin, origin_hours = start, start_hours
            age = _age_h(e.at, e.hours, origin, origin_hours, uses_hours)  # type: ignore[arg-type]
            points.append(
                Point(
                    e.at,
                    age,
                    e.dp_bar,
                    n.dp_ref_bar,
                    e.temp_c,
                    e.indicator,  # type: ignore[arg-type]
                    e.flow_lpm,
                    e.hours,
                    e.id,
                )
            )
        elif isinstance(e, ElementChange):
            elements.append(Element(start, start_hours, e.at, e, tuple(points), uses_hours))
            start, start_hours, points = e.at, e.hours, []
    elements.append(Element(start, start_hours, None, None, tuple(points), uses_hours))
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
