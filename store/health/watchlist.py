"""The watch list from the book: the plant a list covers (`plant`), the breathers'
statuses (`breathers_at`), the list in its one order (`watch_list`), and the audit paths,
computed from the entries as they stood at a time with nothing kept read: one filter
(`status_as_of`), the plant's filters (`filters_as_of`, from a few reads for the whole
plant) and the whole list (`watch_as_of`). store.views assembles the list now from the kept
rows where their key holds and from these where it does not."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta
from functools import partial
from operator import attrgetter

from store.base.records import frozen_record
from store.db.book import Book
from store.health.conditions import FilterContext, contexts_from, shortest_read_h
from store.health.elements import ElementSummary, split_summaries
from store.health.fluidcare import SwapRecord, forecast_from, spent_fraction, swap_record
from store.health.lives import like_lives, like_lives_all, live_changes
from store.health.status import filter_status, status_from
from store.health.status_model import BreatherStatus, FilterStatus, UnitStatus, Watch
from store.health.units import unit_status
from store.ledger.entries import Entry
from store.ledger.journal import (
    element_items_until,
    live_changes_until,
    live_swap_marks,
    read,
)
from store.ledger.register import Breather, FilterPosition, Fluid, Unit, list_all


def status_as_of(book: Book, ctx: FilterContext, as_of: datetime) -> FilterStatus:
    """One filter's status as of a time, from every entry as it stood then (and like
    positions' lives). The status now, from the caches, is store.views.status_of."""
    now = as_of
    # An audit takes only what existed at that time, voided only by voids dated before it.
    until = now + timedelta(seconds=1)
    entries = [
        e for e in read(book, filter=ctx.position.tag, until=until, as_of=until) if not e.voided
    ]
    return filter_status(ctx, entries, now, partial(like_lives, book, ctx, until))


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


@frozen_record
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
    swaps = live_swap_marks(book, now + timedelta(seconds=1))  # only what the forecast reads
    breathers = list_all(book, Breather, unit)
    records = {b.tag.upper(): swap_record(swaps.get(b.tag.upper(), ())) for b in breathers}
    return breathers_from(breathers, records, now)


_urgency = attrgetter("urgency")


def watch_list(
    now: datetime,
    filters: list[FilterStatus],
    breathers: list[BreatherStatus],
    units: list[UnitStatus],
    recomputed: Sequence[str] = (),
) -> Watch:
    filters.sort(key=lambda s: s.urgency(now))
    return Watch(now, tuple(filters), tuple(breathers), tuple(units), tuple(recomputed))


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


def breathers_from(
    breathers: Sequence[Breather], records: dict[str, SwapRecord], now: datetime
) -> list[BreatherStatus]:
    """`breathers_at` from what each breather's swaps come to (`records`, by upper-case tag,
    as store/derived/breathercache.py keeps them), most urgent first."""
    found = [breather_status_from(b, records[b.tag.upper()], now) for b in breathers]
    found.sort(key=_urgency)
    return found


def breather_status_from(breather: Breather, record: SwapRecord, now: datetime) -> BreatherStatus:
    forecast = forecast_from(breather, record, now)
    flags = []
    if forecast.overdue:
        flags.append("swap-overdue")
    fraction = spent_fraction(forecast.last_condition) if forecast.last_condition else None
    if fraction is not None and fraction >= 0.99:
        flags.append("desiccant-spent")
    return BreatherStatus(breather.tag, breather.unit, breather.kind, forecast, tuple(flags))
