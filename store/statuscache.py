"""The status caches: each filter's and unit's computed status, kept fresh on every write.

- `status_cache`: each filter's status, refreshed inside every write (journal.AFTER_WRITE ->
  `after_entry`) from the element cache (store/elementcache.py) and the entries since the
  last element change;
- `unit_cache`: each unit's fluid-care status (top-ups, samples, hot readings).

Derived tables: `rebuild()` (`sumpbook rebuild`) recomputes them and the element cache from the
entries at any time, and nothing reads them for an audit (`watch(as_of=...)` always computes
from the entries).
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import asdict, dataclass, fields, replace
from datetime import datetime, timedelta
from typing import Any

from .book import Book
from .conditions import FilterContext, context, contexts
from .elementcache import (
    Elements,
    context_key,
    elements_now,
    encode_element,
    max_rowid,
    try_write,
)
from .elements import split_summaries
from .entries import Entry, Reading, Void
from .fluidcare import Consumption
from .journal import element_items, parse_stamp
from .lives import like_lives, like_lives_from, like_positions, live_changes
from .normalise import ColdStart
from .register import FilterPosition, Unit, find, list_all
from .status import (
    CACHE_MAX_AGE,
    Due,
    FilterStatus,
    LifeSummary,
    UnitStatus,
    own_failures,
    status_from,
    unit_status,
)
from .timeutil import format_utc

FORMAT = 2  # bump when the stored status shape changes: old rows are then recomputed
MAX_AGE = CACHE_MAX_AGE  # time-dependent parts (age, hot flag) are refreshed daily
_SKIP = ("history", "forecast", "age_to_time")
_TIMES = ("reading_at", "changed_at", "overdue_at")
_utc = parse_stamp


def preload() -> None:
    """Import the fitting maths (numpy, scipy) now: the cached watch list needs none of it, a
    recomputed status does. Call before taking the write lock, or in the background."""
    from . import anomaly, life, trend  # noqa: F401


# ---- the status rows -----------------------------------------------------------------------------


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
        data[name] = _utc(data[name]) if data.get(name) else None
    for name in ("due", "bypass_due"):
        if data.get(name):
            data[name] = Due(**{k: _utc(v) if v else None for k, v in data[name].items()})
    data["cold"] = ColdStart(**data["cold"]) if data.get("cold") else None
    data["life"] = LifeSummary(**data["life"]) if data.get("life") else None
    for name in ("flags", "notes", "spark"):
        data[name] = tuple(data.get(name) or ())
    return FilterStatus(**data, history=())


def store_status(book: Book, status: FilterStatus, now: datetime, pools: bool = True) -> None:
    """Keep one status row. `pools`: the status leans on like positions' lives (it has fewer
    than three failures of its own, or no like lives yet), so a change there makes it stale."""
    book.conn.execute(
        "INSERT INTO status_cache(filter, computed_utc, format, data, pools, stale) "
        "VALUES (?, ?, ?, ?, ?, 0) "
        "ON CONFLICT(filter) DO UPDATE SET computed_utc = excluded.computed_utc, "
        "format = excluded.format, data = excluded.data, pools = excluded.pools, stale = 0",
        [status.filter, format_utc(now), FORMAT, _encode(status), int(pools)],
    )


def filter_view(book: Book, tag: str) -> tuple[FilterStatus, Elements]:
    """What the filter sheet shows, now: the full status (curve, history, forecast) and every
    element's summary, from the element cache and the entries since the last change (no
    rereading of the position's history)."""
    ctx = context(book, tag)
    els = elements_now(book, ctx)
    status = status_from(ctx, els.past, els.current, book.now(), like_lives(book, ctx, None))
    return status, els


# ---- live status ---------------------------------------------------------------------------------


def live_status(
    book: Book,
    ctx: FilterContext,
    now: datetime | None = None,
    like: Sequence[tuple[float, bool]] | None = None,
) -> tuple[FilterStatus, bool, bool]:
    """One filter's status now (the same as `filter_status` computes from every live entry);
    whether it leans on like positions' lives; whether its removed elements changed."""
    now = now or book.now()
    els = elements_now(book, ctx)
    if like is None:
        like = like_lives(book, ctx, None)
    status = status_from(ctx, els.past, els.current, now, like)
    return status, own_failures(ctx, els.past) < 3 or not like, els.changed


def after_entry(book: Book, entry: Entry) -> None:
    """Called inside the write transaction: refresh the filter the entry touches (when its
    removed elements changed, mark stale the like positions whose status leans on its
    lives) and the unit whose fluid-care status it can change."""
    unit = _touches_unit(book, entry)
    if unit:
        refresh_unit(book, unit)
    tag = getattr(entry, "filter", None)
    if isinstance(entry, Void):
        row = book.conn.execute("SELECT filter FROM entries WHERE id = ?", [entry.voids]).fetchone()
        tag = row[0] if row else None
    if not tag:
        return
    ctx = context(book, tag)
    status, pools, changed = live_status(book, ctx)
    store_status(book, status, book.now(), pools)
    if changed:
        like = [p.tag for p in like_positions(list_all(book, FilterPosition), ctx)]
        for i in range(0, len(like), 500):
            part = like[i : i + 500]
            book.conn.execute(
                "UPDATE status_cache SET stale = 1 WHERE pools = 1 AND filter IN "
                f"({', '.join('?' for _ in part)})",
                part,
            )


def refresh(book: Book, ctx: FilterContext) -> FilterStatus:
    """Recompute one filter's status now and keep it."""
    now = book.now()
    status, pools, _ = live_status(book, ctx, now)
    try_write(book, lambda: store_status(book, status, now, pools))
    return status


def _with_time(status: FilterStatus, now: datetime) -> FilterStatus:
    """Adjust the overdue flag for the time that has passed since the row was computed."""
    flags = [f for f in status.flags if f != "reading-overdue"]
    if status.overdue_at and now > status.overdue_at:
        flags.append("reading-overdue")
    if tuple(flags) == status.flags:
        return status
    return replace(status, flags=tuple(flags))


_Row = tuple[str, int, str, int]  # computed_utc, format, data, stale


def _rows(book: Book) -> dict[str, _Row]:
    return {
        r[0].upper(): (r[1], r[2], r[3], r[4])
        for r in book.conn.execute(
            "SELECT filter, computed_utc, format, data, stale FROM status_cache"
        )
    }


def _usable(row: _Row | None, now: datetime, max_age: timedelta | None) -> bool:
    """A row to show as it is: of this format, and (unless max_age is None, which takes any
    such row) not marked stale and computed no longer than max_age ago."""
    if row is None or row[1] != FORMAT:
        return False
    if max_age is None:
        return True
    computed = _utc(row[0])
    return not row[3] and computed <= now and now - computed <= max_age


def stale_filters(book: Book, max_age: timedelta = MAX_AGE) -> list[str]:
    """Tags whose cached status is missing, of an old format, marked stale or older than
    max_age: what a background refresh should recompute (no contexts built: a screen that
    shows the kept rows at once counts them too)."""
    now, rows = book.now(), _rows(book)
    tags = book.conn.execute("SELECT tag FROM filters ORDER BY tag")
    return [tag for (tag,) in tags if not _usable(rows.get(tag.upper()), now, max_age)]


def cached_filters(
    book: Book,
    ctxs: Sequence[FilterContext],
    now: datetime,
    max_age: timedelta | None = MAX_AGE,
) -> list[FilterStatus]:
    """Every filter's status from the cache, recomputing rows that are missing or stale.

    max_age None takes any cached row however old or marked stale (its overdue flag still
    follows the clock): a screen can show that at once and let `refresh_stale` catch up in
    the background. Only missing rows are then computed."""
    rows = _rows(book)
    result: list[FilterStatus] = []
    fresh: list[tuple[FilterStatus, bool]] = []
    for ctx in ctxs:
        row = rows.get(ctx.position.tag.upper())
        if _usable(row, now, max_age):
            result.append(_with_time(_decode(row[2]), now))  # type: ignore[index]
            continue
        status, pools, _ = live_status(book, ctx, now)
        fresh.append((status, pools))
        result.append(status)
    if fresh:
        try_write(book, lambda: [store_status(book, s, now, p) for s, p in fresh])
    return result


def refresh_stale(book: Book, max_age: timedelta = MAX_AGE, limit: int | None = None) -> list[str]:
    """Recompute (at most `limit`) stale rows and keep them; returns the tags done."""
    ctxs = contexts(book)
    tags = stale_filters(book, max_age)[:limit]
    for tag in tags:
        refresh(book, ctxs[tag.upper()])
    return tags


# ---- units ---------------------------------------------------------------------------------------

UNIT_FORMAT = 1


def _unit_key(unit: Unit, filters: Sequence[FilterPosition]) -> str:
    """The register rows a unit's status depends on (its own, its filters' ratings)."""
    own = {f.name: getattr(unit, f.name) for f in fields(unit)}  # asdict, without its deep copy
    return json.dumps(
        [UNIT_FORMAT, own, [[f.tag, f.rating_um] for f in filters]], ensure_ascii=False
    )


def _encode_unit(status: UnitStatus) -> str:
    return json.dumps(asdict(status), ensure_ascii=False)


def _decode_unit(text: str) -> UnitStatus:
    data = json.loads(text)
    data["consumption"] = Consumption(**data["consumption"]) if data["consumption"] else None
    data["flags"], data["notes"] = tuple(data["flags"]), tuple(data["notes"])
    return UnitStatus(**data)


def _store_unit(book: Book, status: UnitStatus, key: str, now: datetime) -> None:
    book.conn.execute(
        "INSERT OR REPLACE INTO unit_cache(unit, computed_utc, register, data) VALUES (?, ?, ?, ?)",
        [status.unit, format_utc(now), key, _encode_unit(status)],
    )


def cached_units(
    book: Book,
    units: Sequence[Unit],
    filters_by_unit: dict[str, list[FilterPosition]],
    now: datetime,
    max_age: timedelta | None = MAX_AGE,
) -> list[UnitStatus]:
    """Every unit's status from the cache, recomputing rows that are missing, stale (older
    than max_age: their windows of 7 to 30 days move on) or made from other register rows."""
    rows = {
        r[0].upper(): (r[1], r[2], r[3])
        for r in book.conn.execute("SELECT unit, computed_utc, register, data FROM unit_cache")
    }
    limit = max_age if max_age is not None else timedelta.max
    result, fresh = [], []
    for unit in units:
        filters = filters_by_unit.get(unit.tag.upper(), [])
        key = _unit_key(unit, filters)
        row = rows.get(unit.tag.upper())
        if row is not None and row[1] == key:
            computed = _utc(row[0])
            if computed <= now and now - computed <= limit:
                result.append(_decode_unit(row[2]))
                continue
        status = unit_status(book, unit, filters, now)
        fresh.append((status, key))
        result.append(status)
    if fresh:
        try_write(book, lambda: [_store_unit(book, s, k, now) for s, k in fresh])
    return result


def refresh_unit(book: Book, tag: str, now: datetime | None = None) -> UnitStatus | None:
    """Recompute one unit's status and keep it (inside a save: in its transaction)."""
    unit = find(book, Unit, tag)
    if unit is None:
        return None
    now = now or book.now()
    filters = list_all(book, FilterPosition, unit.tag)
    status = unit_status(book, unit, filters, now)
    try_write(book, lambda: _store_unit(book, status, _unit_key(unit, filters), now))
    return status


def _touches_unit(book: Book, entry: Entry) -> str | None:
    """The unit whose status this entry can change: top-ups, samples and notes (and a void
    of anything) always, a reading if it is hot, anything dated before the unit's first
    entry (the top-up history starts there)."""
    if isinstance(entry, Void):
        row = book.conn.execute("SELECT unit FROM entries WHERE id = ?", [entry.voids]).fetchone()
        return row[0] if row else None
    tag = entry.unit
    if not tag:
        return None
    if entry.kind in ("topup", "sample", "note"):
        return tag
    if isinstance(entry, Reading) and entry.temp_c is not None:
        unit = find(book, Unit, tag)
        if unit is not None and entry.temp_c > unit.max_temp_c:
            return tag
    first = book.conn.execute("SELECT min(at_utc) FROM entries WHERE unit = ?", [tag]).fetchone()
    if entry.at is not None and first[0] is not None and format_utc(entry.at) <= first[0]:
        return tag
    return None


# ---- rebuilding -----------------------------------------------------------------------------------

WRITE_CHUNK = 100  # positions per write transaction: other writers wait a moment at most


@dataclass(frozen=True)
class _Rebuilt:
    tag: str
    context: str
    seen_rowid: int
    elements: list[tuple[str, bytes, str]]  # (removal id, data, curve) oldest first
    last_change: str | None
    last_change_utc: str | None
    status: str  # encoded status row
    pools: bool


def _compute(book: Book, tags: Sequence[str], now: datetime) -> list[_Rebuilt]:
    """Every derived row of these positions from the entries (one read snapshot)."""
    ctxs = contexts(book)
    positions = list_all(book, FilterPosition)
    changes = live_changes(book, None)
    seen = max_rowid(book)
    out = []
    for tag in tags:
        ctx = ctxs[tag.upper()]
        past, current = split_summaries(ctx, element_items(book, ctx.position.tag))
        like = like_lives_from(changes, positions, ctx)
        status = status_from(ctx, past, current, now, like)
        last = past[-1] if past else None
        out.append(
            _Rebuilt(
                ctx.position.tag,
                context_key(ctx),
                seen,
                [(el.removal_id, *encode_element(el)) for el in past],
                last.removal_id if last else None,
                format_utc(last.removed_at) if last else None,
                _encode(status),
                own_failures(ctx, past) < 3 or not like,
            )
        )
    return out


def _compute_in_snapshot(book: Book, tags: Sequence[str], now: datetime) -> list[_Rebuilt]:
    conn = book.conn
    own = not conn.in_transaction
    if own:
        conn.execute("BEGIN")  # a read snapshot: writers go on, we see one state of the book
    try:
        return _compute(book, tags, now)
    finally:
        if own:
            conn.execute("COMMIT")


def _store_rebuilt(book: Book, rows: Sequence[_Rebuilt], now: datetime) -> None:
    conn = book.conn
    for r in rows:
        conn.execute("DELETE FROM element_cache WHERE filter = ?", [r.tag])
        conn.executemany(
            "INSERT INTO element_cache(filter, seq, removal_id, data, curve) VALUES (?, ?, ?, ?, ?)",
            [(r.tag, i, *el) for i, el in enumerate(r.elements)],
        )
        conn.execute(
            "INSERT OR REPLACE INTO element_state(filter, context, seen_rowid, last_change, "
            "last_change_utc, elements) VALUES (?, ?, ?, ?, ?, ?)",
            [r.tag, r.context, r.seen_rowid, r.last_change, r.last_change_utc, len(r.elements)],
        )
        conn.execute(
            "INSERT OR REPLACE INTO status_cache(filter, computed_utc, format, data, pools, "
            "stale) VALUES (?, ?, ?, ?, ?, 0)",
            [r.tag, format_utc(now), FORMAT, r.status, int(r.pools)],
        )


def rebuild(book: Book) -> int:
    """Drop and recompute the derived tables (element summaries and statuses) from the entries
    (in this process: no worker processes, see DEVELOPERS.md "Keeping it quick")."""
    now = book.now()
    tags = [ctx.position.tag for ctx in contexts(book).values()]
    with book.atomic():
        for table in ("element_state", "element_cache", "status_cache", "unit_cache"):
            book.conn.execute(f"DELETE FROM {table}")
    rows = _compute_in_snapshot(book, tags, now)
    for i in range(0, len(rows), WRITE_CHUNK):
        with book.atomic():
            _store_rebuilt(book, rows[i : i + WRITE_CHUNK], now)
    # Entries written while we computed: their filters again, from the cache just kept.
    seen = min((r.seen_rowid for r in rows), default=0)
    touched = {
        row[0].upper()
        for row in book.conn.execute(
            "SELECT e.filter FROM entries v JOIN entries e ON e.id = coalesce(v.voids, v.id) "
            "WHERE v.rowid > ? AND e.filter IS NOT NULL",
            [seen],
        )
    }
    if touched:
        ctxs = contexts(book)
        with book.atomic():
            for tag in touched:
                if tag in ctxs:
                    status, pools, _ = live_status(book, ctxs[tag], now)
                    store_status(book, status, now, pools)
    units = list_all(book, Unit)
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in list_all(book, FilterPosition):
        by_unit.setdefault(position.unit.upper(), []).append(position)
    with book.atomic():
        cached_units(book, units, by_unit, now)
    return len(rows)
