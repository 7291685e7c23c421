"""What each breather's swaps come to, kept (schema 9: `breather_cache`, `breather_seen`).

A breather's forecast (store.health.fluidcare) takes of its live swaps only the median life
its desiccant told and the last swap (`SwapRecord`). Kept here per breather, the watch list
reads one row per breather instead of every swap the plant ever logged.

A kept row stands for what the swaps give now when three things hold:
- the row format is this code's (`breather_seen.format`, `FORMAT`);
- no entry written after `breather_seen.seen_rowid` touches the breather: a swap of it, or a
  void of one (entries are append-only, so those are the only ways its swaps change);
- the clock: a forecast at `now` reads the swaps dated before `now` + 1 s (the bound). The row
  read those before `bound_utc`; it holds for a bound from `bound_utc` up to `until_utc`, the
  first date of a swap of it or a void of one at or after `bound_utc` (NULL: none).
Anything else is computed from the swaps (`records_now`), as the list always did.

Rows are written in a save's transaction (`keep_touched`, from store.record: the breathers
the entries written since the mark touch, read again, and the mark moved on), by the app's
catch-up (`refresh`: also the rows the clock has left) and by `rebuild`. Readers never write.
tests/store/test_breather_rows.py holds the kept rows to the computation from the swaps.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from datetime import datetime, timedelta
from hashlib import blake2b

from store.base.timeutil import format_utc, parse_utc
from store.db.book import Book
from store.derived.elementcache import max_rowid
from store.health.fluidcare import NO_SWAPS, SwapRecord, swap_record
from store.ledger.journal import live_swap_marks
from store.ledger.register import Breather, list_all

RULES = 1  # what a row's numbers mean; a change here, and every kept row is read again
FORMAT = blake2b(repr([RULES, SwapRecord._fields]).encode(), digest_size=8).hexdigest()

_TOUCHED = (  # the breathers whose swaps an entry written after the rowid adds or voids
    "SELECT DISTINCT upper(coalesce(t.breather, e.breather)) FROM entries e "
    "LEFT JOIN entries t ON e.voids IS NOT NULL AND t.id = e.voids "
    "WHERE e.rowid > ? AND coalesce(t.kind, e.kind) = 'breather'"
)
_UNTIL = (  # the first date of a swap of each breather, or a void of one, at or after a bound
    "SELECT upper(b), min(at) FROM ("
    " SELECT e.breather AS b, e.at_utc AS at FROM entries e WHERE e.kind = 'breather'"
    "  AND e.breather IN (SELECT value FROM json_each(?1)) AND e.at_utc >= ?2"
    " UNION ALL"
    " SELECT e.breather, v.at_utc FROM entries e JOIN entries v ON v.voids = e.id"
    "  WHERE e.kind = 'breather' AND e.breather IN (SELECT value FROM json_each(?1))"
    "  AND v.at_utc >= ?2"
    ") GROUP BY upper(b)"
)


def bound(now: datetime) -> str:
    """The swaps a forecast at `now` reads are those dated before this stamp."""
    return format_utc(now + timedelta(seconds=1))


def _mark(book: Book) -> int | None:
    """The rowid every kept row holds up to, or None (no rows kept, or of another format)."""
    row = book.conn.execute("SELECT seen_rowid, format FROM breather_seen").fetchone()
    return row[0] if row is not None and row[1] == FORMAT else None


def _touched_since(book: Book, rowid: int) -> set[str]:
    return {tag for (tag,) in book.conn.execute(_TOUCHED, [rowid]) if tag is not None}


def _stamp_text(moment: datetime) -> str:
    """A swap's time as the book writes a stamp (six decimals where it has them), which
    `parse_utc` reads back to the same moment."""
    text = format_utc(moment)
    return text if not moment.microsecond else f"{text[:-1]}.{moment.microsecond:06d}Z"


def kept_records(book: Book, now: datetime) -> dict[str, SwapRecord]:
    """The kept rows that hold at `now`, by upper-case tag (the rest are left out)."""
    mark = _mark(book)
    if mark is None:
        return {}
    touched = _touched_since(book, mark)
    limit = bound(now)
    out = {}
    for tag, bound_utc, until_utc, median, last_at, condition in book.conn.execute(
        "SELECT breather, bound_utc, until_utc, median_life_d, last_at, last_condition "
        "FROM breather_cache"
    ):
        tag = tag.upper()
        if tag in touched or not _spans(bound_utc, until_utc, limit):
            continue
        record = _record(median, last_at, condition)
        if record is not None:
            out[tag] = record
    return out


def _spans(bound_utc: object, until_utc: object, limit: str) -> bool:
    """Whether a row read for `bound_utc`, with nothing dated from it to `until_utc`, reads
    as a reader with the bound `limit` would (a value that is no text: not kept here)."""
    if not isinstance(bound_utc, str) or not (until_utc is None or isinstance(until_utc, str)):
        return False
    return bound_utc <= limit and (until_utc is None or limit <= until_utc)


def _record(median: object, last_at: object, condition: object) -> SwapRecord | None:
    """A row's values as a SwapRecord, or None where they are not what this code writes (an
    edit by hand: the breather is computed instead)."""
    if median is not None and not isinstance(median, float):
        return None
    if not isinstance(condition, str):
        return None
    if last_at is None:
        return SwapRecord(median, None, condition)
    try:
        return SwapRecord(median, parse_utc(last_at), condition)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None


def computed(book: Book, now: datetime, tags: Sequence[str] | None) -> dict[str, SwapRecord]:
    """What the live swaps give at `now`, by upper-case tag, of `tags` (None: every breather
    with a swap); a breather with no swap is left out."""
    marks = live_swap_marks(book, now + timedelta(seconds=1), tags)
    return {tag: swap_record(swaps) for tag, swaps in marks.items()}


def records_now(book: Book, now: datetime, tags: Sequence[str]) -> dict[str, SwapRecord]:
    """Every breather of `tags` at `now`: its kept row where that holds, else from its swaps
    (nothing written). A breather with no swap maps to the empty record."""
    kept = kept_records(book, now)
    rest = [t for t in tags if t.upper() not in kept]
    if rest:
        kept.update(computed(book, now, rest if kept else None))
    return {t.upper(): kept.get(t.upper(), NO_SWAPS) for t in tags}


# ---- writing -------------------------------------------------------------------------------------


def _keep(book: Book, tags: Sequence[str], now: datetime) -> None:
    """Compute and keep the rows of `tags` (register tags) at `now`, in the caller's
    transaction."""
    if not tags:
        return
    limit = bound(now)
    records = computed(book, now, tags)
    until = dict(book.conn.execute(_UNTIL, [json.dumps(list(tags)), limit]))
    book.conn.executemany(
        "INSERT OR REPLACE INTO breather_cache(breather, bound_utc, until_utc, median_life_d, "
        "last_at, last_condition) VALUES (?, ?, ?, ?, ?, ?)",
        [
            (
                tag,
                limit,
                until.get(tag.upper()),
                record.median_life_d,
                None if record.last_at is None else _stamp_text(record.last_at),
                record.last_condition,
            )
            for tag in tags
            for record in [records.get(tag.upper(), NO_SWAPS)]
        ],
    )


def _set_mark(book: Book, rowid: int) -> None:
    book.conn.execute(
        "INSERT OR REPLACE INTO breather_seen(one, seen_rowid, format) VALUES (1, ?, ?)",
        [rowid, FORMAT],
    )


def _register_tags(book: Book) -> list[str]:
    return [b.tag for b in list_all(book, Breather)]


def keep_touched(book: Book) -> None:
    """Inside a save's transaction, after its entries: the breathers the entries written
    since the mark touch are read again and kept, and the mark moves to the newest entry (no
    mark yet, or of another format: every breather is read)."""
    newest = max_rowid(book)
    mark = _mark(book)
    if mark is None:
        _keep_all(book, newest)
        return
    if mark >= newest:
        return
    touched = _touched_since(book, mark)
    if touched:  # most saves are readings: no breather to read again, only the mark moves
        _keep(book, [t for t in _register_tags(book) if t.upper() in touched], book.now())
    _set_mark(book, newest)


def _keep_all(book: Book, newest: int) -> None:
    book.conn.execute("DELETE FROM breather_cache")
    _keep(book, _register_tags(book), book.now())
    _set_mark(book, newest)


def refresh(book: Book) -> None:
    """The explicit refresh (the app's catch-up behind a list): bring the mark up to the
    newest entry and read again every row that does not hold at the book's clock, in one
    transaction. A read-only book is left as it is."""
    if book.readonly or _all_held(book):
        return  # no write lock taken for nothing
    with book.atomic():
        keep_touched(book)
        now = book.now()
        held = kept_records(book, now)
        _keep(book, [t for t in _register_tags(book) if t.upper() not in held], now)


def _all_held(book: Book) -> bool:
    mark = _mark(book)
    if mark is None or mark < max_rowid(book):
        return False
    held = kept_records(book, book.now())
    return all(t.upper() in held for t in _register_tags(book))


def rebuild(book: Book) -> None:
    """Every row again from the swaps (`sumpbook rebuild`), in one transaction."""
    with book.atomic():
        _keep_all(book, max_rowid(book))
