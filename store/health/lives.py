"""Element lives across positions: the live element changes of each position, and the
change-to-change lives of the positions that take the same element (by part number), which
a position with few lives of its own pools with.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from typing import Any

from store.base.timeutil import format_utc
from store.db.book import Book
from store.health.conditions import FilterContext
from store.health.elements import REACHED_REASONS
from store.ledger.journal import parse_stamp
from store.ledger.register import FilterPosition

# The covering partial index entries_filter_changes (schema V3) holds all this reads; named,
# because without statistics SQLite would rather walk every entry of the position in order.
LIVE_CHANGES_SQL = (
    "SELECT e.filter, e.at_utc, e.reason FROM entries e INDEXED BY entries_filter_changes "
    "WHERE e.kind = 'change' AND e.filter IS NOT NULL{where} AND NOT EXISTS (SELECT 1 FROM "
    "entries v WHERE v.voids = e.id{void_until}) ORDER BY e.filter, e.at_utc, e.rowid"
)


def live_changes(
    book: Book, until: datetime | None, tags: Sequence[str] | None = None
) -> dict[str, list[tuple[datetime, str]]]:
    """(time, reason) of the live element changes of the positions `tags` (all when None),
    oldest first, keyed by upper-case tag. With `until`: as the book stood then (changes
    before it, voided only by voids dated before it)."""
    sql = LIVE_CHANGES_SQL
    params: list[Any] = []
    where = void_until = ""
    if until is not None:
        where, void_until = " AND e.at_utc < ?", " AND v.at_utc < ?"
    groups = [None] if tags is None else [tags[i : i + 500] for i in range(0, len(tags), 500)]
    out: dict[str, list[tuple[datetime, str]]] = {}
    for part in groups:
        params = []
        clause = ""
        if part is not None:
            clause = f" AND e.filter IN ({', '.join('?' for _ in part)})"
            params += list(part)
        if until is not None:
            params += [format_utc(until), format_utc(until)]
        text = sql.format(where=clause + where, void_until=void_until)
        for tag, at, reason in book.conn.execute(text, params):
            out.setdefault(tag.upper(), []).append((parse_stamp(at), reason or ""))
    return out


def like_positions(positions: Sequence[FilterPosition], ctx: FilterContext) -> list[FilterPosition]:
    """Other positions taking the same element (by part number, any case), in tag order."""
    if not ctx.position.element:
        return []
    element = ctx.position.element.lower()
    return [p for p in positions if p.tag != ctx.position.tag and p.element.lower() == element]


def like_lives_from(
    changes: dict[str, list[tuple[datetime, str]]],
    positions: Sequence[FilterPosition],
    ctx: FilterContext,
) -> list[tuple[float, bool]]:
    """(life_h, reached_limit) of removed elements on like positions, from their changes."""
    return _lives(changes, [p.tag for p in like_positions(positions, ctx)])


def like_lives_all(
    changes: dict[str, list[tuple[datetime, str]]], positions: Sequence[FilterPosition]
) -> dict[str, list[tuple[float, bool]]]:
    """`like_lives_from(changes, positions, ctx)` of every position in `positions`, keyed by
    tag: each position's own lives worked out once, not once for every like position."""
    own = {p.tag: _lives(changes, [p.tag]) for p in positions}
    groups: dict[str, list[str]] = {}
    for p in positions:
        if p.element:
            groups.setdefault(p.element.lower(), []).append(p.tag)
    return {
        p.tag: [life for tag in groups[p.element.lower()] if tag != p.tag for life in own[tag]]
        if p.element
        else []
        for p in positions
    }


def _lives(
    changes: dict[str, list[tuple[datetime, str]]], tags: Sequence[str]
) -> list[tuple[float, bool]]:
    """Change-to-change lives of these positions, in their order."""
    lives: list[tuple[float, bool]] = []
    for tag in tags:
        mine = changes.get(tag.upper(), [])
        for (prev_at, _), (cur_at, reason) in zip(mine, mine[1:], strict=False):
            life = (cur_at - prev_at).total_seconds() / 3600
            if life > 0:
                lives.append((life, reason in REACHED_REASONS))
    return lives


def like_lives(book: Book, ctx: FilterContext, until: datetime | None) -> list[tuple[float, bool]]:
    """(life_h, reached_limit) of removed elements on other positions taking the same element."""
    if not ctx.position.element:
        return []
    element = ctx.position.element.lower()
    others = [  # tag order, as list_all gives them
        tag
        for tag, part in book.conn.execute("SELECT tag, element FROM filters ORDER BY tag")
        if tag != ctx.position.tag and part.lower() == element
    ]
    if not others:
        return []
    return _lives(live_changes(book, until, others), others)
