"""The watch list and each filter's status, as the screens and the command line ask for them:
now from the status caches (what moves with the clock worked out at read time), as of a past
time from the entries (kept rows standing in where nothing after that time touches them).
Nothing here writes. The sheets built on them are in store/sheets.py."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

from store.base.timeutil import format_utc
from store.db.book import Book
from store.derived.elementcache import kept_before
from store.derived.statuscache import (
    cached_units,
    kept_filters,
    kept_units,
    live_status,
    stale_filters,
    watch_filters,
)
from store.health import status
from store.health.conditions import FilterContext
from store.health.status import FilterStatus, UnitStatus, Watch
from store.ledger.register import FilterPosition, Unit, list_all


def watch(
    book: Book,
    as_of: datetime | None = None,
    unit: str | None = None,
    stale_ok: bool = False,
) -> Watch:
    """The watch list. Now: from the status caches (kept on every save; what moves with the
    clock is worked out at read time). Rows marked stale (a like position's lives changed)
    are recomputed in memory first, unless `stale_ok`: a screen that shows the list at once
    and has `record.refresh_stale` catch up behind it. As of a past time: as the entries
    stood then (`status.watch_as_of`), kept rows standing in where they provably hold
    (`standing`, `kept_before`). Never writes."""
    if as_of is not None:
        return status.watch_as_of(book, as_of, unit, kept_before, standing)
    now = book.now()
    # The plant as status.plant covers it, without the contexts (built only for a row that
    # must be computed: see statuscache.watch_filters).
    all_units, positions = list_all(book, Unit), list_all(book, FilterPosition)
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in positions:
        by_unit.setdefault(position.unit.upper(), []).append(position)
    mine = [q for q in positions if unit is None or q.unit == unit]
    filters = watch_filters(book, mine, now, stale_ok)
    units = cached_units(
        book, [u for u in all_units if unit is None or u.tag == unit], by_unit, now
    )
    return status.watch_list(now, filters, status.breathers_at(book, now, unit), units)


def standing(
    book: Book, p: status.Plant, positions: Sequence[FilterPosition], as_of: datetime
) -> tuple[dict[str, FilterStatus], dict[str, UnitStatus]]:
    """The kept statuses that stand for filters and units at `as_of`, by upper-case tag. A
    filter's kept row does when nothing touching the filter (an entry, or a void of one) is
    dated at or after that time, nor anything on a position taking the same element (whose
    lives its forecast pools), and the row was kept by then: it was computed from exactly
    the entries an audit reads, and the clock-dependent parts are worked out at `as_of` as
    for any read. A unit's row likewise. tests/store/test_status_as_of.py holds the list
    made with them to the one computed from the entries alone."""
    late = touched_since(book, as_of + timedelta(seconds=1))
    late_parts = {q.element.lower() for q in positions if q.element and q.tag.upper() in late}
    quiet = [
        c.position.tag.upper()
        for c in p.contexts
        if c.position.tag.upper() not in late
        and (c.position.element or "").lower() not in late_parts
    ]
    units = [u for u in p.units if u.tag.upper() not in late]
    return kept_filters(book, quiet, as_of), kept_units(book, units, p.positions_by_unit, as_of)


def touched_since(book: Book, since: datetime) -> set[str]:
    """Upper-case tags of the filters and units with an entry, or a void of one, dated at or
    after `since`."""
    rows = book.conn.execute(
        "SELECT DISTINCT coalesce(t.filter, e.filter), coalesce(t.unit, e.unit) "
        "FROM entries e LEFT JOIN entries t ON t.id = e.voids WHERE e.at_utc >= ?",
        [format_utc(since)],
    )
    return {tag.upper() for row in rows for tag in row if tag}


def stale_count(book: Book) -> int:
    """How many filters' kept rows a refresh would recompute (missing, old format, stale)."""
    return len(stale_filters(book))


def status_of(book: Book, ctx: FilterContext, as_of: datetime | None = None) -> FilterStatus:
    """One filter's status. Now: from the element cache and the entries since the last
    element change (the same result, see store.derived.statuscache); as of a past time: from
    every entry as it stood then."""
    if as_of is None:
        return live_status(book, ctx)[0]
    return status.status_as_of(book, ctx, as_of)
