"""The status cache: each filter's computed status, refreshed when its entries change.

A derived table: `rebuild()` recomputes it from the entries at any time, and nothing
reads it for an audit (`watch(as_of=...)` always computes from the entries).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import asdict, fields
from datetime import datetime, timedelta
from typing import Any

from .book import Book
from .conditions import FilterContext, context, contexts
from .entries import Entry, Void
from .normalise import ColdStart
from .status import Due, FilterStatus, LifeSummary, status_of
from .timeutil import format_utc, parse_utc

FORMAT = 1  # bump when the stored shape changes: old rows are then recomputed
MAX_AGE = timedelta(hours=24)  # time-dependent parts (age, hot flag) are refreshed daily
_SKIP = ("history", "forecast", "age_to_time")
_TIMES = ("reading_at", "changed_at", "overdue_at")


def _encode(status: FilterStatus) -> str:
    data: dict[str, Any] = {}
    for f in fields(status):
        if f.name in _SKIP:
            continue
        value = getattr(status, f.name)
        if f.name in _TIMES:
            value = format_utc(value) if value else None
        elif f.name in ("due", "bypass_due"):
            value = (
                None
                if value is None
                else {k: format_utc(v) if v else None for k, v in asdict(value).items()}
            )
        elif f.name in ("cold", "life"):
            value = None if value is None else asdict(value)
        data[f.name] = value
    return json.dumps(data, ensure_ascii=False)


def _decode(text: str) -> FilterStatus:
    data = json.loads(text)
    for name in _TIMES:
        data[name] = parse_utc(data[name]) if data.get(name) else None
    for name in ("due", "bypass_due"):
        if data.get(name):
            data[name] = Due(**{k: parse_utc(v) if v else None for k, v in data[name].items()})
    data["cold"] = ColdStart(**data["cold"]) if data.get("cold") else None
    data["life"] = LifeSummary(**data["life"]) if data.get("life") else None
    for name in ("flags", "notes", "spark"):
        data[name] = tuple(data.get(name) or ())
    return FilterStatus(**data, history=())


def store_status(book: Book, status: FilterStatus, now: datetime) -> None:
    book.conn.execute(
        "INSERT INTO status_cache(filter, computed_utc, format, data) VALUES (?, ?, ?, ?) "
        "ON CONFLICT(filter) DO UPDATE SET computed_utc = excluded.computed_utc, "
        "format = excluded.format, data = excluded.data",
        [status.filter, format_utc(now), FORMAT, _encode(status)],
    )


def refresh(book: Book, ctx: FilterContext) -> FilterStatus:
    """Recompute one filter's status now and keep it."""
    now = book.now()
    status = status_of(book, ctx, None)
    with book.atomic():
        store_status(book, status, now)
    return status


def after_entry(book: Book, entry: Entry) -> None:
    """Called inside the write transaction: refresh the filter the entry touches."""
    tag = getattr(entry, "filter", None)
    if isinstance(entry, Void):
        row = book.conn.execute("SELECT filter FROM entries WHERE id = ?", [entry.voids]).fetchone()
        tag = row[0] if row else None
    if tag:
        store_status(book, status_of(book, context(book, tag), None), book.now())


def _with_time(status: FilterStatus, now: datetime) -> FilterStatus:
    """Adjust the overdue flag for the time that has passed since the row was computed."""
    flags = [f for f in status.flags if f != "reading-overdue"]
    if status.overdue_at and now > status.overdue_at:
        flags.append("reading-overdue")
    if tuple(flags) == status.flags:
        return status
    from dataclasses import replace

    return replace(status, flags=tuple(flags))


def cached_filters(book: Book, ctxs: Sequence[FilterContext], now: datetime) -> list[FilterStatus]:
    """Every filter's status from the cache, recomputing rows that are missing or stale."""
    rows = {
        r[0].upper(): (r[1], r[2], r[3])
        for r in book.conn.execute("SELECT filter, computed_utc, format, data FROM status_cache")
    }
    result, fresh = [], []
    for ctx in ctxs:
        row = rows.get(ctx.position.tag.upper())
        if (
            row
            and row[1] == FORMAT
            and now - parse_utc(row[0]) <= MAX_AGE
            and parse_utc(row[0]) <= now
        ):
            result.append(_with_time(_decode(row[2]), now))
            continue
        status = status_of(book, ctx, None)
        fresh.append(status)
        result.append(status)
    if fresh:
        try:
            with book.atomic():
                for status in fresh:
                    store_status(book, status, now)
        except Exception:  # a read-only book still answers; the cache just stays cold
            pass
    return result


def rebuild(book: Book) -> int:
    """Drop and recompute the whole cache from the entries."""
    now = book.now()
    statuses = [status_of(book, ctx, None) for ctx in contexts(book).values()]
    with book.atomic():
        book.conn.execute("DELETE FROM status_cache")
        for status in statuses:
            store_status(book, status, now)
    return len(statuses)
