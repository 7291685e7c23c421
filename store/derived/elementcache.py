"""The element cache: per filter position, a summary of every element that has been taken
out, so that a status reads only the entries since the last element change.

A derived table (schema V3: element_cache, element_state): `statuscache.rebuild` recomputes it
from the entries. It checks itself before use, so a writer that skips the hooks (a bulk load, a
merge of late entries, a void of an old reading) cannot make it lie: entries are seen up to a
rowid, and any later entry or void that reaches back before the last cached element change,
or a change in what normalising depends on (fluid, temperature, flow, hour meter), makes that
position's summaries be recomputed from its entries.
"""

from __future__ import annotations

import json
from array import array
from collections.abc import Sequence
from datetime import datetime
from typing import Any

from store.base.records import frozen_record
from store.base.timeutil import format_utc
from store.db.book import Book
from store.health.conditions import FilterContext
from store.health.elements import Element, ElementSummary, split_summaries
from store.ledger.entries import Entry
from store.ledger.journal import element_items, parse_stamp

ELEMENT_FORMAT = 1  # bump when what an element summary holds changes
_utc = parse_stamp


def context_key(ctx: FilterContext) -> str:
    """What splitting and normalising a position's readings depend on (not the limits: those
    are applied when a summary is used)."""
    curve, ref = ctx.curve, ctx.reference
    return json.dumps(
        [
            ELEMENT_FORMAT,
            curve and [curve.nu40_cst, curve.nu100_cst],
            ref and [ref.nu_ref_cst, ref.flow_ref_lpm],
            ctx.problem,
            ctx.unit.normal_temp_c,
            ctx.unit.hour_meter,
        ]
    )


def _pair(pair: tuple[datetime, float] | None) -> list[Any] | None:
    return None if pair is None else [format_utc(pair[0]), pair[1]]


def _unpair(value: list[Any] | None) -> tuple[datetime, float] | None:
    return None if value is None else (_utc(value[0]), value[1])


def encode_element(el: ElementSummary) -> tuple[str, bytes]:
    data = {
        "fitted_at": format_utc(el.fitted_at) if el.fitted_at else None,
        "fitted_hours": el.fitted_hours,
        "removed_at": format_utc(el.removed_at),
        "removal_id": el.removal_id,
        "reason": el.reason,
        "condition": el.condition,
        "batch": el.batch,
        "removal_hours": el.removal_hours,
        "uses_hours": el.uses_hours,
        "readings": el.readings,
        "hour_readings": el.hour_readings,
        "first_hours": _pair(el.first_hours),
        "last_hours": _pair(el.last_hours),
    }
    curve = array("d", el.ages_h + el.dp_ref_bar).tobytes()  # exact: float64 both ways
    return json.dumps(data, ensure_ascii=False), curve


def _decode_element(text: str, curve: bytes) -> ElementSummary:
    data = json.loads(text)
    values = array("d")
    values.frombytes(curve)
    half = len(values) // 2
    return ElementSummary(
        fitted_at=_utc(data["fitted_at"]) if data["fitted_at"] else None,
        fitted_hours=data["fitted_hours"],
        removed_at=_utc(data["removed_at"]),
        removal_id=data["removal_id"],
        reason=data["reason"],
        condition=data["condition"],
        batch=data["batch"],
        removal_hours=data["removal_hours"],
        uses_hours=data["uses_hours"],
        readings=data["readings"],
        ages_h=tuple(values[:half]),
        dp_ref_bar=tuple(values[half:]),
        hour_readings=data["hour_readings"],
        first_hours=_unpair(data["first_hours"]),
        last_hours=_unpair(data["last_hours"]),
    )


@frozen_record
class _State:
    context: str
    seen_rowid: int
    last_change: str | None  # id of the change that ended the last cached element
    last_change_utc: str | None
    count: int  # cached elements


def _state(book: Book, tag: str) -> _State | None:
    row = book.conn.execute(
        "SELECT context, seen_rowid, last_change, last_change_utc, elements "
        "FROM element_state WHERE filter = ?",
        [tag],
    ).fetchone()
    return None if row is None else _State(*row)


def max_rowid(book: Book) -> int:
    return book.conn.execute("SELECT coalesce(max(rowid), 0) FROM entries").fetchone()[0]


def _reached_into(book: Book, states: dict[str, _State]) -> set[str]:
    """The element cache's key check, for every position of `states` (by upper-case tag) at
    once: those whose cached summaries no longer hold for the live entries, because an entry
    written after the cache was checked (`seen_rowid`), or a void of one, is dated at or
    before the change that ended the last cached element. Each position's own entries by its
    index; the voids (few) in one walk."""
    conn = book.conn
    late: set[str] = set()
    cached = {tag: st for tag, st in states.items() if st.last_change is not None}
    if not cached:
        return late
    for tag, st in cached.items():
        if conn.execute(
            "SELECT 1 FROM entries WHERE filter = ? AND at_utc <= ? AND rowid > ? LIMIT 1",
            [tag, st.last_change_utc, st.seen_rowid],
        ).fetchone():
            late.add(tag)
    since = min(st.seen_rowid for st in cached.values())
    # Voids are few: their own partial index answers "any since?" at once, and walks them.
    newest = conn.execute(
        "SELECT max(rowid) FROM entries INDEXED BY one_void_per_entry WHERE voids IS NOT NULL"
    ).fetchone()[0]
    if newest is None or newest <= since:
        return late
    for tag, at, rowid in conn.execute(
        "SELECT e.filter, e.at_utc, v.rowid FROM entries v INDEXED BY one_void_per_entry "
        "CROSS JOIN entries e ON e.id = v.voids WHERE v.voids IS NOT NULL AND v.rowid > ? "
        "AND e.filter IS NOT NULL",
        [since],
    ):
        st = cached.get(tag.upper())
        if st is not None and rowid > st.seen_rowid and at <= st.last_change_utc:
            late.add(tag.upper())
    return late


def _write_elements(
    book: Book,
    tag: str,
    key: str,
    seen: int,
    past: Sequence[ElementSummary],
    start: int,
) -> None:
    """Store summaries past[start:] and the state (inside the caller's transaction)."""
    conn = book.conn
    if start == 0:
        conn.execute("DELETE FROM element_cache WHERE filter = ?", [tag])
    conn.executemany(
        "INSERT INTO element_cache(filter, seq, removal_id, data, curve) VALUES (?, ?, ?, ?, ?)",
        [(tag, i, el.removal_id, *encode_element(el)) for i, el in enumerate(past[start:], start)],
    )
    last = past[-1] if past else None
    conn.execute(
        "INSERT INTO element_state(filter, context, seen_rowid, last_change, last_change_utc, "
        "elements) VALUES (?, ?, ?, ?, ?, ?) ON CONFLICT(filter) DO UPDATE SET "
        "context = excluded.context, seen_rowid = excluded.seen_rowid, "
        "last_change = excluded.last_change, last_change_utc = excluded.last_change_utc, "
        "elements = excluded.elements",
        [
            tag,
            key,
            seen,
            last.removal_id if last else None,
            format_utc(last.removed_at) if last else None,
            len(past),
        ],
    )


@frozen_record
class Elements:
    """A position's elements as the live entries stand."""

    past: list[ElementSummary]  # every removed element, oldest first
    current: Element  # the element in service, with its readings
    changed: bool  # the removed elements differ from what the cache held before


def elements_now(book: Book, ctx: FilterContext, keep: bool = False) -> Elements:
    """The summaries of every removed element and the element in service, as the live entries
    stand: from the element cache and the entries since the last cached change, the cache
    checked, extended or rebuilt as needed. `keep` writes what was brought up to date (the
    write path and an explicit refresh, in their transaction); a read writes nothing."""

    def write(past: list[ElementSummary], start: int) -> None:
        if keep:
            with book.atomic():
                _write_elements(book, tag, key, seen, past, start)

    tag = ctx.position.tag
    key = context_key(ctx)
    seen = max_rowid(book)
    state = _state(book, tag)
    if state is None or state.context != key or _reached_into(book, {tag.upper(): state}):
        past, current = split_summaries(ctx, element_items(book, tag))
        before = [
            r[0]
            for r in book.conn.execute(
                "SELECT removal_id FROM element_cache WHERE filter = ? ORDER BY seq", [tag]
            )
        ]
        write(past, 0)
        return Elements(past, current, before != [el.removal_id for el in past])
    past = [
        _decode_element(text, curve)
        for text, curve in book.conn.execute(
            "SELECT data, curve FROM element_cache WHERE filter = ? ORDER BY seq", [tag]
        )
    ]
    new, current = split_summaries(ctx, element_items(book, tag, state.last_change))
    if state.last_change is not None:
        new = new[1:]  # the first is the cached element that change ended
    if new or seen != state.seen_rowid:
        start = len(past)
        past += new
        write(past, start)
    return Elements(past, current, bool(new))


def kept_before(
    book: Book,
    ctxs: Sequence[FilterContext],
    changes: Sequence[tuple[str, int, Entry]],
    until: datetime,
) -> tuple[dict[str, list[ElementSummary]], dict[str, tuple[str, int]]]:
    """Per position (upper-case tag): the element cache's summaries of its elements taken out
    before `until`, and where its entries must be read from, the (at_utc, rowid) of the
    change that ended the last of them, or ("", 0): from the beginning.

    A summary depends only on the entries between the element's two changes, all dated before
    `until`. The cache is used where it holds for the live entries now (the check the status
    itself relies on: same context, no entry or void written since that reaches back into it)
    and no void dated at or after `until` touches the position: then the entries it was made
    from are the ones that counted at `until`."""
    stamp = format_utc(until)
    starts: dict[str, tuple[str, int]] = {c.position.tag.upper(): ("", 0) for c in ctxs}
    kept: dict[str, list[ElementSummary]] = {}
    late = {
        tag.upper()
        for (tag,) in book.conn.execute(
            "SELECT e.filter FROM entries v INDEXED BY one_void_per_entry CROSS JOIN entries e "
            "ON e.id = v.voids WHERE v.voids IS NOT NULL AND v.at_utc >= ? "
            "AND e.filter IS NOT NULL",
            [stamp],
        )
    }
    states = {
        row[0].upper(): _State(*row[1:])
        for row in book.conn.execute(
            "SELECT filter, context, seen_rowid, last_change, last_change_utc, elements "
            "FROM element_state WHERE last_change IS NOT NULL"
        )
    }
    cached: dict[str, list[tuple[str, bytes]]] = {}
    for tag, text, curve in book.conn.execute(
        "SELECT filter, data, curve FROM element_cache ORDER BY filter, seq"
    ):
        cached.setdefault(tag.upper(), []).append((text, curve))
    where = {entry.id: (at, rowid) for at, rowid, entry in changes}
    late |= _reached_into(book, states)
    for ctx in ctxs:
        key = ctx.position.tag.upper()
        state = states.get(key)
        if (
            key in late
            or state is None
            or state.context != context_key(ctx)
            or len(cached.get(key, ())) != state.count
        ):
            continue
        past = []
        for text, curve in cached[key]:
            summary = _decode_element(text, curve)
            if format_utc(summary.removed_at) >= stamp:
                break
            past.append(summary)
        if past and past[-1].removal_id in where:
            kept[key] = past
            starts[key] = where[past[-1].removal_id]
    return kept, starts
