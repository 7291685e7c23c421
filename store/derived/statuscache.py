"""The status caches: each filter's and unit's computed status, kept fresh on every write.

- `status_cache`: each filter's status, refreshed inside every write (store.record ->
  `after_entry`) from the element cache (store/derived/elementcache.py) and the entries since the
  last element change;
- `unit_cache`: each unit's fluid-care status (top-ups, samples, hot readings).

Time-proof: a row holds what changes only with the entries (the fitted forecast as element
ages and calendar dates, summaries, flags of the readings) and, for a filter, its
`status.Clock`; the parts that move with the clock (element age, check-now, a service-life
due given the age so far, reading-overdue, hot) are worked out from those at read time
(`status.at_time`), and a unit's windows from its kept top-ups and hot readings
(`status.unit_at`). A row is never too old to use.

Reads never write. Rows are written by the write path (`after_entry`, in the save's
transaction) and by an explicit refresh: `refresh_stale` (the app's catch-up behind a list
with rows marked stale or of an old format) and `rebuild()` (`sumpbook rebuild`), which
recomputes them and the element cache from the entries at any time. A read that finds a row
missing, stale or of an old format computes it in memory and leaves the book as it was.
An audit (`views.watch(as_of=...)`) uses a kept row only where nothing dated at or after its
time touches the filter or a position that takes the same element (`views.standing`), and
computes the rest from the entries; tests/store/test_timeproof.py holds the kept rows against
a copy of the book with every derived row dropped.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import asdict, dataclass, fields
from datetime import datetime
from typing import Any

from store.base.timeutil import format_utc
from store.db.book import Book
from store.derived.elementcache import (
    Elements,
    context_key,
    elements_now,
    encode_element,
    max_rowid,
)
from store.health.conditions import FilterContext, context, contexts
from store.health.elements import split_summaries
from store.health.lives import like_lives, like_lives_from, like_positions, live_changes
from store.health.status import (
    Clock,
    Due,
    FilterStatus,
    LifeSummary,
    UnitClock,
    UnitStatus,
    _Ages,
    clock_parts,
    own_failures,
    status_from,
    unit_at,
    unit_clock,
)
from store.ledger.entries import Entry, Reading, TopUp, Void
from store.ledger.journal import element_items, parse_stamp
from store.ledger.register import FilterPosition, Unit, find, list_all
from store.physics.normalise import ColdStart

FORMAT = 7  # bump when the stored status shape or its rules change: old rows are recomputed
# (4: next-reading time; 5: the ΔP drop on same-minute readings and steep rises, STEP UP
# words, NEW HIGH; 6: the next reading's two-reading earliest date and the change visit)
_SKIP = ("history", "forecast", "age_to_time", "clock")
_TIMES = ("reading_at", "changed_at", "overdue_at", "next_reading")
_utc = parse_stamp


def preload() -> None:
    """Import the fitting maths (numpy, scipy) now: the cached watch list needs none of it, a
    recomputed status does. Call before taking the write lock, or in the background."""
    from store.forecast import anomaly, life, trend  # noqa: F401


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
    data["clock"] = _encode_clock(status.clock) if status.clock else None
    return json.dumps(data, ensure_ascii=False)


def _ages(ages: Any) -> list[float] | None:
    return None if ages is None else [ages.earliest_h, ages.likely_h, ages.latest_h]


def _encode_clock(clock: Clock) -> list[Any]:
    """In field order, as a list (a row is decoded on every read). Floats as they are: JSON
    keeps a float64 exactly (inf too)."""
    return [
        format_utc(clock.valid_from) if clock.valid_from else None,
        format_utc(clock.origin) if clock.origin else None,
        [format_utc(clock.meter[0]), *clock.meter[1:]] if clock.meter else None,
        [_ages(a) for a in clock.due_ages] if clock.due_ages else None,
        clock.last_age_h,
        clock.state,
        clock.check_after_h,
        clock.note_at,
        clock.check_words,
        clock.notes,
        clock.life,
        [[format_utc(at), temp_c] for at, temp_c in clock.hot],
        clock.max_temp_c,
    ]


def _decode_clock(data: list[Any]) -> Clock:
    valid_from, origin, meter, due_ages, *middle, life, hot, max_temp_c = data
    return Clock(
        _utc(valid_from) if valid_from else None,
        _utc(origin) if origin else None,
        (_utc(meter[0]), *meter[1:]) if meter else None,  # type: ignore[arg-type]
        tuple(None if a is None else _Ages(*a) for a in due_ages) if due_ages else None,
        *middle,
        tuple(life) if life else None,  # type: ignore[arg-type]
        tuple((_utc(at), temp_c) for at, temp_c in hot),
        max_temp_c,
    )


def _decode(text: str, now: datetime | None = None) -> FilterStatus:
    """A kept row; with `now`, brought to that time (`status.at_time`, in one go)."""
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
    clock = data["clock"] = _decode_clock(data["clock"]) if data.get("clock") else None
    if now is not None and clock is not None:
        data.update(
            clock_parts(
                data["flags"],
                data["notes"],
                data["due"],
                data["bypass_due"],
                data["gauge"],
                data["overdue_at"],
                clock,
                now,
            )  # fmt: skip
        )
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
    rereading of the position's history; nothing written)."""
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
    keep: bool = False,
) -> tuple[FilterStatus, bool, bool]:
    """One filter's status now (the same as `filter_status` computes from every live entry);
    whether it leans on like positions' lives; whether its removed elements changed.
    `keep`: bring the element cache up to date (the write path and a refresh only, inside
    their transaction); otherwise nothing is written."""
    now = now or book.now()
    els = elements_now(book, ctx, keep=keep)
    if like is None:
        like = like_lives(book, ctx, None)
    status = status_from(ctx, els.past, els.current, now, like)
    return status, own_failures(ctx, els.past) < 3 or not like, els.changed


def after_entry(book: Book, entry: Entry) -> FilterStatus | None:
    """Called inside the write transaction: refresh the filter the entry touches (when its
    removed elements changed, mark stale the like positions whose status leans on its
    lives) and the unit whose fluid-care status it can change. Returns the filter's status
    as kept (None when the entry is on no filter)."""
    unit = _touches_unit(book, entry)
    if unit:
        refresh_unit(book, unit)
    tag = getattr(entry, "filter", None)
    if isinstance(entry, Void):
        row = book.conn.execute("SELECT filter FROM entries WHERE id = ?", [entry.voids]).fetchone()
        tag = row[0] if row else None
    if not tag:
        return None
    ctx = context(book, tag)
    status, pools, changed = live_status(book, ctx, keep=True)
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
    return status


def _inputs_seen(book: Book) -> tuple[int, int]:
    """What a status is computed from, as two counters that only grow: the newest entry's
    rowid (entries are never deleted) and the newest register change's."""
    row = book.conn.execute(
        "SELECT (SELECT coalesce(max(rowid), 0) FROM entries), "
        "(SELECT coalesce(max(rowid), 0) FROM register_log)"
    ).fetchone()
    return row[0], row[1]


def refresh(book: Book, ctx: FilterContext) -> FilterStatus:
    """An explicit refresh: recompute one filter's status now and keep it (with its element
    summaries) in one transaction, or in the caller's.

    The fitting runs before the write lock so that a writer is not held up by it; under the
    lock the inputs are compared with what the fitting saw, and if an entry or a register
    change landed in between, the status is computed again there: a kept row never holds a
    view of the entries older than the moment it is stored."""
    now = book.now()
    seen = _inputs_seen(book)
    status, pools, _ = live_status(book, ctx, now)  # the fitting, before the write lock
    with book.atomic():
        if _inputs_seen(book) != seen:
            ctx = context(book, ctx.position.tag)
            status, pools, _ = live_status(book, ctx, now, keep=True)
        else:
            elements_now(book, ctx, keep=True)
        store_status(book, status, now, pools)
    return status


_Row = tuple[str, int, str, int]  # computed_utc, format, data, stale


def _rows(book: Book) -> dict[str, _Row]:
    return {
        r[0].upper(): (r[1], r[2], r[3], r[4])
        for r in book.conn.execute(
            "SELECT filter, computed_utc, format, data, stale FROM status_cache"
        )
    }


def _timed(row: _Row | None, now: datetime, stale_ok: bool) -> FilterStatus | None:
    """The kept status at `now`, or None where it must be recomputed: missing, of another
    format, marked stale (unless stale_ok), or read at a time before it holds for (the clock
    set back past its newest reading)."""
    if row is None or row[1] != FORMAT or (row[3] and not stale_ok):
        return None
    if now < _utc(row[0]):  # the clock set back: the row may hold later readings
        return None
    status = _decode(row[2], now)
    return status if status.clock is not None else None


def stale_filters(book: Book) -> list[str]:
    """Tags whose kept status is missing, of an old format or marked stale: what a refresh
    should recompute (no contexts built: a screen that shows the kept rows at once counts
    them too). Age alone never makes a row stale."""
    rows = _rows(book)
    tags = book.conn.execute("SELECT tag FROM filters ORDER BY tag")
    return [
        tag
        for (tag,) in tags
        if (row := rows.get(tag.upper())) is None or row[1] != FORMAT or row[3]
    ]


def cached_filters(
    book: Book,
    ctxs: Sequence[FilterContext],
    now: datetime,
    stale_ok: bool = False,
) -> list[FilterStatus]:
    """Every filter's status at `now` from the cache, however long ago it was kept; rows
    that are missing, of an old format or marked stale are computed in memory (nothing is
    written: `refresh_stale` keeps them).

    stale_ok takes rows marked stale as they are: a screen can show that at once and let
    `refresh_stale` catch up in the background."""
    rows = _rows(book)
    result: list[FilterStatus] = []
    for ctx in ctxs:
        status = _timed(rows.get(ctx.position.tag.upper()), now, stale_ok)
        if status is None:
            status = live_status(book, ctx, now)[0]
        result.append(status)
    return result


def watch_filters(
    book: Book,
    positions: Sequence[FilterPosition],
    now: datetime,
    stale_ok: bool = False,
) -> list[FilterStatus]:
    """`cached_filters` for register positions, without their contexts: a kept row is read
    as it is, and only when one must be computed (missing, old format, marked stale unless
    `stale_ok`, the clock set back) are the plant's contexts built (they resolve each fluid's
    curve, which may load scipy). So the list read from fresh rows loads none of the fitting
    maths (tests/cli/test_lean_path.py)."""
    rows = _rows(book)
    result: list[FilterStatus] = []
    ctxs: dict[str, FilterContext] | None = None
    for position in positions:
        status = _timed(rows.get(position.tag.upper()), now, stale_ok)
        if status is None:
            if ctxs is None:
                ctxs = {tag.upper(): c for tag, c in contexts(book).items()}
            status = live_status(book, ctxs[position.tag.upper()], now)[0]
        result.append(status)
    return result


def kept_filters(book: Book, tags: Sequence[str], now: datetime) -> dict[str, FilterStatus]:
    """The kept status at `now` of each of `tags` (upper case) whose row can be read then: one
    of this format, not marked stale, kept at or before `now`. The rest are left out."""
    rows = _rows(book)
    out = {}
    for tag in tags:
        status = _timed(rows.get(tag), now, stale_ok=False)
        if status is not None:
            out[tag] = status
    return out


def kept_units(
    book: Book,
    units: Sequence[Unit],
    filters_by_unit: dict[str, list[FilterPosition]],
    now: datetime,
) -> dict[str, UnitStatus]:
    """`cached_units` for the units whose kept row can be read at `now` (made from the same
    register rows, kept at or before `now`), by upper-case tag; the rest are left out."""
    rows = {
        r[0].upper(): (r[1], r[2], r[3])
        for r in book.conn.execute("SELECT unit, computed_utc, register, data FROM unit_cache")
    }
    out = {}
    for unit in units:
        filters = filters_by_unit.get(unit.tag.upper(), [])
        row = rows.get(unit.tag.upper())
        if row is not None and row[1] == _unit_key(unit, filters) and _utc(row[0]) <= now:
            clock = _decode_unit(row[2], unit.tag)
            out[unit.tag.upper()] = unit_at(unit, filters, clock, now)
    return out


def refresh_stale(book: Book, limit: int | None = None) -> list[str]:
    """The explicit refresh behind a watch list: recompute (at most `limit`) rows that are
    missing, of an old format or marked stale, and keep them, each in its own transaction.
    A read-only book is left as it is. Returns the tags done."""
    if book.readonly:
        return []
    ctxs = contexts(book)
    tags = stale_filters(book)[:limit]
    for tag in tags:
        refresh(book, ctxs[tag.upper()])
    units = _stale_units(book)
    if units:
        with book.atomic():
            for tag in units:
                refresh_unit(book, tag)
    return tags


# ---- units ---------------------------------------------------------------------------------------

UNIT_FORMAT = 4  # 4: the newest sample's water content kept (a key on old rows recomputes them)


def _unit_key(unit: Unit, filters: Sequence[FilterPosition]) -> str:
    """The register rows a unit's status depends on (its own, its filters' ratings)."""
    own = {f.name: getattr(unit, f.name) for f in fields(unit)}  # asdict, without its deep copy
    return json.dumps(
        [UNIT_FORMAT, own, [[f.tag, f.rating_um] for f in filters]], ensure_ascii=False
    )


def _encode_unit(clock: UnitClock) -> str:
    return json.dumps(
        {
            "valid_from": format_utc(clock.valid_from),
            "first_at": format_utc(clock.first_at) if clock.first_at else None,
            "early_l": clock.early_l,
            "early_n": clock.early_n,
            "topups": [
                [t.id, format_utc(t.at), t.volume_l, t.filtered_um, t.hours]  # type: ignore[arg-type]
                for t in clock.topups
            ],
            "sample": clock.sample,
            "hot": [format_utc(at) for at in clock.hot],
            "water": clock.water_ppm,
        },
        ensure_ascii=False,
    )


def _decode_unit(text: str, tag: str) -> UnitClock:
    data = json.loads(text)
    return UnitClock(
        valid_from=_utc(data["valid_from"]),
        first_at=_utc(data["first_at"]) if data["first_at"] else None,
        early_l=data["early_l"],
        early_n=data["early_n"],
        topups=tuple(
            TopUp(id=i, at=_utc(at), unit=tag, volume_l=v, filtered_um=um, hours=h)
            for i, at, v, um, h in data["topups"]
        ),
        sample=tuple(data["sample"]) if data["sample"] else None,  # type: ignore[arg-type]
        hot=tuple(_utc(at) for at in data["hot"]),
        water_ppm=data.get("water"),
    )


def _store_unit(book: Book, tag: str, clock: UnitClock, key: str) -> None:
    book.conn.execute(
        "INSERT OR REPLACE INTO unit_cache(unit, computed_utc, register, data) VALUES (?, ?, ?, ?)",
        [tag, format_utc(clock.valid_from), key, _encode_unit(clock)],
    )


def _stale_units(book: Book) -> list[str]:
    """Units whose kept row is missing or made from other register rows or another format."""
    rows = dict(book.conn.execute("SELECT upper(unit), register FROM unit_cache").fetchall())
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in list_all(book, FilterPosition):
        by_unit.setdefault(position.unit.upper(), []).append(position)
    return [
        u.tag
        for u in list_all(book, Unit)
        if rows.get(u.tag.upper()) != _unit_key(u, by_unit.get(u.tag.upper(), []))
    ]


def cached_units(
    book: Book,
    units: Sequence[Unit],
    filters_by_unit: dict[str, list[FilterPosition]],
    now: datetime,
) -> list[UnitStatus]:
    """Every unit's status at `now` from its kept entries, however long ago they were kept;
    rows missing, made from other register rows or read before they hold for are computed
    in memory (nothing is written)."""
    kept = kept_units(book, units, filters_by_unit, now)
    result = []
    for unit in units:
        status = kept.get(unit.tag.upper())
        if status is None:
            filters = filters_by_unit.get(unit.tag.upper(), [])
            status = unit_at(unit, filters, unit_clock(book, unit, now), now)
        result.append(status)
    return result


def refresh_unit(book: Book, tag: str, now: datetime | None = None) -> UnitStatus | None:
    """Recompute one unit's kept entries and keep them (in a save: in its transaction)."""
    unit = find(book, Unit, tag)
    if unit is None:
        return None
    now = now or book.now()
    filters = list_all(book, FilterPosition, unit.tag)
    clock = unit_clock(book, unit, now)
    with book.atomic():
        _store_unit(book, unit.tag, clock, _unit_key(unit, filters))
    return unit_at(unit, filters, clock, now)


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
                    status, pools, _ = live_status(book, ctxs[tag], now, keep=True)
                    store_status(book, status, now, pools)
    with book.atomic():
        for unit in list_all(book, Unit):
            refresh_unit(book, unit.tag, now)
    return len(rows)
