"""The watch list and each filter's status, as the screens and the command line ask for them,
now or as of a past time. Each reader uses a kept row (store/derived/statuscache.py; a
breather's, store/derived/breathercache.py) only where
its key matches its inputs as they are (and, as of a time, as they stood then), and computes
the rest from the entries (as of a past time, a filter's earlier kept row where it provably
stands for that time); what moves with the clock is worked out at read time. Nothing here
writes. The sheets built on them are in store/sheets.py."""

from __future__ import annotations

from datetime import datetime, timedelta

from store.base.collector import collector_held
from store.db.book import Book
from store.derived.breathercache import records_now
from store.derived.elementcache import kept_before
from store.derived.statuscache import (
    cached_units,
    kept_as_of,
    kept_filters,
    kept_units,
    live_status,
    register,
    watch_filters,
)
from store.health.conditions import FilterContext
from store.health.status_model import FilterStatus, Watch
from store.health.units import unit_status
from store.health.watchlist import (
    breathers_at,
    breathers_from,
    changes_as_of,
    filters_as_of,
    plant,
    status_as_of,
    watch_list,
)
from store.ledger.register import Breather, FilterPosition, list_all


def watch(book: Book, as_of: datetime | None = None, unit: str | None = None) -> Watch:
    """The watch list. Now: each filter's and unit's kept row where it holds, the rest
    computed in memory. As of a past time: as the entries stood then, kept rows used where
    they hold for that time (`_watch_as_of`). Never writes."""
    if as_of is not None:
        return _watch_as_of(book, as_of, unit)
    # The list of a big plant is a hundred thousand objects without cycles: the collector
    # is held while they are made, as journal.read holds it (not for an as-of list: it
    # computes every status, with the fitting maths' own objects, for seconds).
    with collector_held():
        return _watch_now(book, unit)


def _watch_now(book: Book, unit: str | None) -> Watch:
    now = book.now()
    # The plant as watchlist.plant covers it, without the contexts (built only for a row that
    # must be computed: see statuscache.watch_filters).
    reg = register(book)  # the keys' register part, read once for the list
    all_units, positions = reg.units(), reg.positions()  # list_all's, from the rows read
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in positions:
        by_unit.setdefault(position.unit.upper(), []).append(position)
    mine = [q for q in positions if unit is None or q.unit == unit]
    filters, computed = watch_filters(book, mine, now, reg)
    units = cached_units(
        book, [u for u in all_units if unit is None or u.tag == unit], by_unit, now, reg
    )
    breathers = list_all(book, Breather, unit)
    records = records_now(book, now, [b.tag for b in breathers])
    return watch_list(now, filters, breathers_from(breathers, records, now), units, computed)


def _watch_as_of(book: Book, as_of: datetime, unit: str | None) -> Watch:
    """`watchlist.watch_as_of` (every status from the entries as they stood at `as_of`), with
    the kept rows whose key holds for that time standing in, and the element cache's
    summaries where they provably hold then. tests/store/test_status_as_of.py holds it to
    the computation from the entries alone."""
    p = plant(book, unit)
    positions = list_all(book, FilterPosition)
    reg = register(book)
    tags = [c.position.tag.upper() for c in p.contexts]
    kept_f = kept_as_of(book, tags, as_of, reg)
    kept_u = kept_units(book, list(p.units), p.positions_by_unit, as_of, reg)
    rest = [c for c in p.contexts if c.position.tag.upper() not in kept_f]
    computed = iter(())
    if rest:
        changes = changes_as_of(book, as_of)
        summaries, starts = kept_before(book, rest, changes, as_of + timedelta(seconds=1))
        computed = iter(filters_as_of(book, rest, positions, as_of, (changes, summaries, starts)))
    filters = [kept_f.get(c.position.tag.upper()) or next(computed) for c in p.contexts]
    units = [
        kept_u.get(u.tag.upper())
        or unit_status(book, u, p.positions_by_unit.get(u.tag.upper(), []), as_of)
        for u in p.units
    ]
    return watch_list(as_of, filters, breathers_at(book, as_of, unit), units)


def status_of(book: Book, ctx: FilterContext, as_of: datetime | None = None) -> FilterStatus:
    """One filter's status, now or as of a past time: its kept row where that holds, else
    computed (now: from the element cache and the entries since the last element change;
    as of a time: from every entry as it stood then)."""
    tag = ctx.position.tag.upper()
    if as_of is None:
        kept = kept_filters(book, [tag], book.now()).get(tag)
        return kept if kept is not None else live_status(book, ctx)[0]
    kept = kept_as_of(book, [tag], as_of).get(tag)
    return kept if kept is not None else status_as_of(book, ctx, as_of)
