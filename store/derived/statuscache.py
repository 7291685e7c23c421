"""The status caches: each filter's and unit's computed status, kept on every write.

- `status_cache`: each filter's status (`FilterStatus.to_row`), written inside every save
  (store.record -> `after_entry`) from the element cache (store/derived/elementcache.py) and
  the entries since the last element change; the same fields also as plain columns
  (`LEAN_COLUMNS`), which the watch list reads in one query (`lean_filters`);
- `unit_cache`: each unit's fluid-care entries (`UnitClock.to_row`).

One key per row. A row holds the key of its inputs and is used by a reader (the list now, an
audit as of a time, a filter's status after a save, the filter sheet's next reading) only when
that key is the one its inputs give now; otherwise the reader computes the status from the
entries, in memory. The key:

- `key`: the row format (`FORMAT`: a digest of the kept fields, their types, the note codes'
  words and `RULES`), a digest of the register rows the status reads (the position, its unit,
  that unit's fluid, the shift pattern; for a unit: its row and its positions' rows) and, for
  a filter that leans on like positions' lives (too few of its own for a fit), the like
  positions' tags;
- `kept_seen.seen_rowid`: the entries were read up to this rowid, and no later entry (or void
  of one) touches the row's inputs: the position's entries, like positions' element changes
  where it leans on them, a unit's top-ups, samples, hot readings and anything dated before
  its first entry. Entries are append-only, so comparing the inputs written after it is
  comparing the newest input rowid. A save moves it on for every row its entries leave as
  they were (`move_seen_on`, in the save's transaction);
- the time span it holds for: a row is never read at a time before it was computed (the
  clock set back); an audit uses a filter's row only from its newest input's date on
  (`newest_utc`) and a unit's only before the first input dated after it was computed
  (`until_utc`).

Time-proof: a row holds what changes only with the entries and, for a filter, its
`status_model.Clock`; what moves with the clock (element age, check-now, a service-life due given
the age so far, reading-overdue, hot, the notes' words) is worked out at read time
(`FilterStatus.from_row`, `_from_lean`, `units.unit_at`). tests/store/test_timeproof.py holds the kept rows
against a computation from the entries alone at several clocks.

Reads never write. Rows are written by the write path (`after_entry`, in the save's
transaction) and by an explicit refresh: `refresh_stale` (the app's catch-up behind a list
with rows that do not match their key) and `rebuild()` (`sumpbook rebuild`).
"""

from __future__ import annotations

import json
import math
from array import array
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, fields
from datetime import datetime, timedelta
from functools import cached_property, partial
from typing import Any, NamedTuple

from store.base.records import filled_record, frozen_record
from store.base.timeutil import format_utc
from store.db.book import Book
from store.db.connection import read_snapshot
from store.derived.elementcache import (
    Elements,
    context_key,
    elements_now,
    encode_element,
    max_rowid,
)
from store.health.conditions import FilterContext, context, contexts
from store.health.earlier import LikeLives
from store.health.elements import split_summaries
from store.health.lives import like_lives, like_lives_from, live_changes
from store.health.next_reading import Plan
from store.health.notes import NOTE_TEXT, Note
from store.health.status import status_from
from store.health.status_model import (
    ROW_FIELDS,
    Clock,
    Due,
    FilterStatus,
    LifeSummary,
    UnitClock,
    UnitInputs,
    UnitStatus,
    clock_parts,
)
from store.health.units import unit_at, unit_clock, unit_status_from
from store.ledger.entries import Entry, Reading, TopUp, Void
from store.ledger.journal import element_items, parse_stamp
from store.ledger.register import FilterPosition, Unit, find, list_all, records_from
from store.physics.normalise import ColdStart

try:  # hashlib's own blake2b, without hashlib loading OpenSSL's hashes (3 ms of every start)
    from _blake2 import blake2b
except ImportError:  # an interpreter without the module: hashlib's, whatever it is built from
    from hashlib import blake2b

# Bump when the rules that make a status change while what a row holds stays the same (a
# change of its fields or of the notes' words changes FORMAT by itself).
# Also when how a field is written changes while the fields stay.
RULES = 9  # 7: one key per row, notes as codes, `pooled` only where like lives were used;
# 8: the sparkline packed; 9: the visit at the last gauge step is the change
UNIT_RULES = 5  # 5: one key per row
_utc = parse_stamp


def _digest(value: Any) -> str:
    return blake2b(repr(value).encode(), digest_size=8).hexdigest()


def _shape(*classes: type) -> list[Any]:
    return [[c.__name__, [(f.name, str(f.type)) for f in fields(c)]] for c in classes]


# The row formats, derived from what the rows hold: a field added, renamed or retyped, or a
# note reworded, and every old row is computed again (no number to forget to bump).
FORMAT = _digest(
    [RULES, ROW_FIELDS, _shape(FilterStatus, Clock, Due, LifeSummary, ColdStart, Note)]
    + sorted(NOTE_TEXT.items())
)
UNIT_FORMAT = _digest([UNIT_RULES, _shape(UnitClock, TopUp)])


def preload() -> None:
    """Import the fitting maths (numpy, scipy) now: the cached watch list needs none of it, a
    recomputed status does. Call before taking the write lock, or in the background."""
    from store.forecast import anomaly, life, trend  # noqa: F401


# ---- the keys ------------------------------------------------------------------------------------


@frozen_record
class Register:
    """What the statuses read of the register, once per read: the rows each position's and
    unit's digest is made of (made when first asked for: a save needs two or three, a list
    all of them), each position's like positions and each unit's temperature limit."""

    filter_rows: dict[str, tuple]  # by upper-case tag, in tag order
    filter_units: dict[str, str]
    unit_rows: dict[str, tuple]  # by upper-case tag, in tag order
    fluid_rows: dict[str, tuple | None]  # each unit's fluid
    shifts: list[tuple]
    unit_filters: dict[str, list[str]]  # each unit's positions, in tag order
    like: dict[str, tuple[str, ...]]  # the positions taking its element, itself among them
    unit_limits: dict[str, float]  # each unit's temperature limit (a hot reading is an input)
    columns: dict[str, list[str]] = field(default_factory=dict)  # "filters", "units": names
    _memo: dict[Any, str] = field(default_factory=dict, compare=False)
    # each position's key as made, for a row that leans on like positions and for one that
    # does not (a list asks once per position)
    _keys: tuple[dict[str, str], dict[str, str]] = field(
        default_factory=lambda: ({}, {}), compare=False
    )

    def positions(self) -> list[FilterPosition]:
        """Every filter position, by tag: `list_all(book, FilterPosition)` from the rows read."""
        return records_from(FilterPosition, self.columns["filters"], self.filter_rows.values())

    def units(self) -> list[Unit]:
        """Every unit, by tag: `list_all(book, Unit)` from the rows read."""
        return records_from(Unit, self.columns["units"], self.unit_rows.values())

    def _around(self, unit: str) -> str | None:
        """What a position reads beyond its own row: its unit, that unit's fluid, the shifts."""
        if unit not in self.unit_rows:
            return None
        key = ("around", unit)
        if key not in self._memo:
            row = self.unit_rows[unit]
            self._memo[key] = _digest((row, self.fluid_rows.get(unit), self.shifts))
        return self._memo[key]

    def filter_digest(self, tag: str) -> str:
        if tag not in self.filter_rows:
            return "?"
        key = ("filter", tag)
        if key not in self._memo:
            around = self._around(self.filter_units[tag])
            self._memo[key] = _digest((self.filter_rows[tag], around))
        return self._memo[key]

    def filter_key(self, tag: str, pools: bool) -> str:
        made = self._keys[pools]
        key = made.get(tag)
        if key is None:
            key = made[tag] = self._filter_key(tag, pools)
        return key

    def _filter_key(self, tag: str, pools: bool) -> str:
        like = "own"
        if pools:
            group = self.like.get(tag)
            like = "none" if group is None else self._memo.get(("like", group)) or ""
            if not like:
                like = self._memo["like", group] = _digest(list(group))  # type: ignore[index]
        return f"{FORMAT}.{self.filter_digest(tag)}.{like}"

    def unit_key(self, tag: str) -> str:
        if tag not in self.unit_rows:
            return f"{UNIT_FORMAT}.?"
        filters = [self.filter_digest(t) for t in self.unit_filters.get(tag, [])]
        return f"{UNIT_FORMAT}.{_digest((self.unit_rows[tag], filters))}"


def _table(book: Book, sql: str) -> tuple[list[str], list[tuple]]:
    cur = book.conn.execute(sql)
    return [d[0] for d in cur.description], cur.fetchall()


# What tells that the register rows a `Register` was read from may have moved, in one query
# that reads no table through: the newest line of the register history (every change of a
# register row is logged there, by the file's own triggers for a changed field and by
# sumpbook for an added record and the shift pattern; with its id, a fresh uuid, so that a
# line rolled back and another written at the same rowid still differs), each table's row
# count and highest rowid (a row added or removed outside sumpbook), and the connection's
# data_version (it moves whenever another connection, another program, commits anything).
_REGISTER_STAMP = (
    "SELECT (SELECT rowid || ' ' || id FROM register_log ORDER BY rowid DESC LIMIT 1), "
    + ", ".join(
        f"(SELECT count(*) || ' ' || coalesce(max(rowid), 0) FROM {table})"
        for table in ("filters", "units", "fluids", "shifts")
    )
    + ", data_version FROM pragma_data_version"
)


def register(book: Book) -> Register:
    """The register rows the statuses read: kept on the book between calls (saves one after
    another read it once) and read again once its stamp (`_REGISTER_STAMP`) moved."""
    stamp = book.conn.execute(_REGISTER_STAMP).fetchone()
    kept = book.kept.get("register")
    if kept is not None and kept[0] == stamp:
        return kept[1]
    reg = _read_register(book)
    book.kept["register"] = (stamp, reg)
    return reg


def _read_register(book: Book) -> Register:
    """The register rows the statuses read (a few queries, no contexts, no digest yet)."""
    shifts = book.conn.execute("SELECT * FROM shifts ORDER BY position, starts").fetchall()
    fcols, fluids = _table(book, "SELECT * FROM fluids")
    fluid_rows = {r[fcols.index("tag")].upper(): r for r in fluids}
    ucols, units = _table(book, "SELECT * FROM units ORDER BY tag")
    utag, ufluid, ulimit = ucols.index("tag"), ucols.index("fluid"), ucols.index("max_temp_c")
    unit_rows = {r[utag].upper(): r for r in units}
    cols, rows = _table(book, "SELECT * FROM filters ORDER BY tag")
    tag_i, unit_i, element_i = cols.index("tag"), cols.index("unit"), cols.index("element")
    filter_rows, filter_units, groups, by_unit = {}, {}, {}, {}
    for r in rows:
        tag, unit = r[tag_i].upper(), (r[unit_i] or "").upper()
        filter_rows[tag], filter_units[tag] = r, unit
        if r[element_i]:
            groups.setdefault(r[element_i].lower(), []).append(tag)
        by_unit.setdefault(unit, []).append(tag)
    like = {tag: shared for group in groups.values() for shared in [tuple(group)] for tag in group}
    return Register(
        filter_rows,
        filter_units,
        unit_rows,
        {tag: fluid_rows.get((u[ufluid] or "").upper()) for tag, u in unit_rows.items()},
        shifts,
        by_unit,
        like,
        {tag: u[ulimit] for tag, u in unit_rows.items()},
        {"filters": cols, "units": ucols},
    )


@frozen_record
class _Touch:
    """An entry written after some rowid, or the entry a void written then voids."""

    rowid: int  # the new row's (an entry or a void)
    filter: str  # upper case, "" for none
    unit: str
    kind: str  # the entry's kind (a void: the voided entry's)
    at_utc: str  # the entry's time (a void: the voided entry's)
    temp_c: float | None


def _written_since(book: Book, rowid: int, before: str | None = None) -> list[_Touch]:
    """What was written after `rowid`; with `before` (a time as format_utc writes it), only
    what counts in an audit of an earlier time: an entry dated before it, a void dated
    before it (by its own date, not the voided entry's)."""
    sql, params = "", [rowid]
    if before is not None:
        sql, params = " AND e.at_utc < ?", [rowid, before]
    rows = book.conn.execute(
        "SELECT e.rowid, upper(coalesce(t.filter, e.filter, '')), "
        "upper(coalesce(t.unit, e.unit, '')), coalesce(t.kind, e.kind), "
        "coalesce(t.at_utc, e.at_utc), coalesce(t.temp_c, e.temp_c) "
        "FROM entries e LEFT JOIN entries t ON e.voids IS NOT NULL AND t.id = e.voids "
        f"WHERE e.rowid > ?{sql}",
        params,
    ).fetchall()
    return [_Touch(*r) for r in rows]


@dataclass
class _Moved:
    """The newest rowid written after the oldest row's seen rowid that touches each input,
    by upper-case tag: a position's entries, its element changes, a unit's inputs."""

    own: dict[str, int]
    changes: dict[str, int]
    unit_events: dict[str, int]  # top-ups, samples (and voids of them)
    unit_hot: dict[str, list[tuple[int, float]]]  # (rowid, °C) of readings with a temperature
    unit_any: dict[str, list[tuple[int, str]]]  # (rowid, time) of every entry of the unit
    _groups: dict[int, int] = field(default_factory=dict)  # newest change of a like group

    def filter_moved(self, tag: str, seen: int, pools: bool, like: Sequence[str]) -> bool:
        if self.own.get(tag, 0) > seen:
            return True
        if not pools or not self.changes:
            return False
        newest = self._groups.get(id(like))  # like groups are shared tuples: once each
        if newest is None:
            newest = self._groups[id(like)] = max(self.changes.get(t, 0) for t in like or ("",))
        return newest > seen

    def unit_moved(self, tag: str, seen: int, limit_c: float | None, first: str | None) -> bool:
        if self.unit_events.get(tag, 0) > seen:
            return True
        if any(
            r > seen and (limit_c is None or t > limit_c) for r, t in self.unit_hot.get(tag, ())
        ):
            return True
        return any(
            r > seen and (first is None or at <= first) for r, at in self.unit_any.get(tag, ())
        )


def _moved_since(book: Book, rowid: int, before: str | None = None) -> _Moved:
    moved = _Moved({}, {}, {}, {}, {})
    for t in _written_since(book, rowid, before):
        if t.filter:
            moved.own[t.filter] = max(moved.own.get(t.filter, 0), t.rowid)
            if t.kind == "change":
                moved.changes[t.filter] = max(moved.changes.get(t.filter, 0), t.rowid)
        if t.unit:
            if t.kind in ("topup", "sample"):
                moved.unit_events[t.unit] = max(moved.unit_events.get(t.unit, 0), t.rowid)
            if t.kind == "reading" and t.temp_c is not None:
                moved.unit_hot.setdefault(t.unit, []).append((t.rowid, t.temp_c))
            moved.unit_any.setdefault(t.unit, []).append((t.rowid, t.at_utc))
    return moved


def _seen(book: Book, what: str) -> dict[str, int]:
    return {
        tag.upper(): seen
        for tag, seen in book.conn.execute(
            "SELECT tag, seen_rowid FROM kept_seen WHERE what = ?", [what]
        )
    }


# ---- the kept rows -------------------------------------------------------------------------------


class Kept(NamedTuple):
    """One kept filter row as read, before its key is checked (a named tuple: a list reads
    one per position, and a tuple is made in a fifth of a frozen dataclass's time)."""

    key: str
    computed_utc: str
    newest_utc: str | None
    data: str  # "" where the row was read by its columns (`cols`)
    seen: int
    cols: tuple = ()  # its tag and LEAN_COLUMNS, where it was read by them and they hold it

    @property
    def pools(self) -> bool:
        return _leans(self.key)


def _leans(key: str) -> bool:
    """Whether the row of this key leans on like positions' lives (`Register.filter_key`)."""
    return not key.endswith(".own")


def _kept_rows(
    book: Book, only: Sequence[str] | None = None, lean: bool = False
) -> dict[str, Kept]:
    """The kept filter rows (`only` these tags, when a few are asked for). `lean`: their
    columns (`cols`, empty where the row must be read through `data`) instead of `data`."""
    seen = _seen(book, "filter")
    what = _LEAN_SELECT if lean else "data"
    sql, params = f"SELECT filter, key, computed_utc, newest_utc, {what} FROM status_cache", []
    if only is not None and len(only) <= 20:
        sql += f" WHERE filter IN ({', '.join('?' for _ in only)})"
        params = list(only)
    rows = book.conn.execute(sql, params)
    if lean:
        return {
            r[0].upper(): Kept(
                r[1], r[2], r[3], "", seen.get(r[0].upper(), -1), r[:1] + r[5:] if r[4] else ()
            )
            for r in rows
        }
    return {
        tag.upper(): Kept(key, computed, newest, data, seen.get(tag.upper(), -1))
        for tag, key, computed, newest, data in rows
    }


class Check:
    """Which kept rows hold: the register digests and what was written since the oldest row
    was kept, read once for a whole list."""

    def __init__(self, book: Book, rows: dict[str, Kept], reg: Register | None = None) -> None:
        self.reg = reg or register(book)
        self.rows = rows
        self._at: datetime | None = None
        self._stamp = ""
        oldest = min((r.seen for r in rows.values()), default=0)
        self.newest = max_rowid(book)
        self.moved = (
            _moved_since(book, oldest) if oldest < self.newest else _Moved({}, {}, {}, {}, {})
        )

    def holds(self, tag: str, at: datetime) -> Kept | None:
        """The row of `tag` (upper case) if its key matches and it holds at `at`, else None
        (as the entries stood at a past time: `kept_as_of`)."""
        row = self.rows.get(tag)
        if row is None or row.seen < 0 or row.key != self.reg.filter_key(tag, row.pools):
            return None
        if self._at != at:
            self._at, self._stamp = at, format_utc(at)
        if self._stamp < row.computed_utc:  # the clock set back: it may hold later readings
            return None
        if row.seen < self.newest and self.moved.filter_moved(
            tag, row.seen, row.pools, self.reg.like.get(tag, ())
        ):
            return None
        return row


def store_status(
    book: Book, status: FilterStatus, now: datetime, seen: int, reg: Register | None = None
) -> None:
    """Keep one status row with its key (inside the caller's transaction): `reg`, the
    register it was computed from (read now when not given), and `seen`, the newest entry
    rowid it was computed from."""
    tag = status.filter
    pools = status.life is None or status.life.pooled
    reg = reg or register(book)
    key = reg.filter_key(tag.upper(), pools)
    like = reg.like.get(tag.upper(), ()) if pools else ()
    row = status.to_row()
    lean = _lean(status, row)
    _keep_earlier(book, tag)
    book.conn.execute(
        f"INSERT OR REPLACE INTO status_cache(filter, key, computed_utc, newest_utc, data, "
        f"lean, {', '.join(LEAN_COLUMNS)}) VALUES (?, ?, ?, ?, ?, {_LEAN_MARKS})",
        [
            tag,
            key,
            format_utc(now),
            _newest_input(book, tag, like),
            json.dumps(row, ensure_ascii=False),
            lean is not None,
            *(lean or [None] * len(LEAN_COLUMNS)),
        ],
    )
    _store_seen(book, "filter", [tag], seen)


EARLIER_KEPT = 9  # a filter's rows kept before its row now: three days of a reading a shift
EARLIER_SCAN = 50_000  # entries read at most to check an earlier row (three weeks of 800 filters)


def _keep_earlier(book: Book, tag: str) -> None:
    """Before a filter's kept row is replaced: keep it among its earlier rows, with the rowid
    it was checked up to (a row of an older format never holds again, and is not kept), and
    let only the last EARLIER_KEPT stay (`kept_as_of` reads them)."""
    conn = book.conn
    conn.execute(
        "INSERT OR REPLACE INTO status_earlier(filter, seen_rowid, key, computed_utc, "
        "newest_utc, data) SELECT c.filter, s.seen_rowid, c.key, c.computed_utc, c.newest_utc, "
        "c.data FROM status_cache c JOIN kept_seen s ON s.what = 'filter' AND s.tag = c.filter "
        "WHERE c.filter = ? AND substr(c.key, 1, ?) = ?",
        [tag, len(FORMAT) + 1, f"{FORMAT}."],
    )
    conn.execute(
        "DELETE FROM status_earlier WHERE filter = ? AND seen_rowid NOT IN (SELECT seen_rowid "
        "FROM status_earlier WHERE filter = ? ORDER BY seen_rowid DESC LIMIT ?)",
        [tag, tag, EARLIER_KEPT],
    )


def _store_seen(book: Book, what: str, tags: Sequence[str], seen: int) -> None:
    book.conn.executemany(
        "INSERT OR REPLACE INTO kept_seen(what, tag, seen_rowid) VALUES (?, ?, ?)",
        [(what, tag, seen) for tag in tags],
    )


def _newest_input(book: Book, tag: str, like: Sequence[str]) -> str | None:
    """The newest date among a filter's inputs: its entries, the voids of them, and the
    element changes of the like positions it leans on (and their voids)."""
    conn = book.conn
    voids = _voids(book)
    tag = tag.upper()
    dates = [
        conn.execute("SELECT max(at_utc) FROM entries WHERE filter = ?", [tag]).fetchone()[0],
        voids.any.get(tag),
    ]
    dates += [voids.changes.get(t.upper()) for t in like]
    for i in range(0, len(like), 500):
        part = list(like[i : i + 500])
        marks = ", ".join("?" for _ in part)
        dates.append(
            conn.execute(
                "SELECT max(at_utc) FROM entries INDEXED BY entries_filter_changes "
                f"WHERE kind = 'change' AND filter IN ({marks})",
                part,
            ).fetchone()[0]
        )
    return max((d for d in dates if d), default=None)


@frozen_record
class _Voids:
    """The newest void of each position's entries (`any`) and of its element changes
    (`changes`), by upper-case tag: the voids are few and each save would otherwise join
    them all with the entries they void, twice."""

    any: dict[str, str]
    changes: dict[str, str]


# Entries are append-only (the schema refuses UPDATE, DELETE and REPLACE), so the voids grow
# only: their count and newest rowid say whether one was added since. The newest void's own
# fields too, for a void rolled back and another written at the same rowid (the book also
# forgets what it kept when its transaction rolls back: `Book.atomic`).
_VOIDS_STAMP = (
    "SELECT n, r, (SELECT id || ' ' || voids || ' ' || at_utc FROM entries WHERE rowid = r) "
    "FROM (SELECT count(*) AS n, max(rowid) AS r FROM entries INDEXED BY one_void_per_entry "
    "WHERE voids IS NOT NULL)"
)


def _voids(book: Book) -> _Voids:
    """The voids' newest dates by position, kept on the book while no void is added."""
    stamp = book.conn.execute(_VOIDS_STAMP).fetchone()
    kept = book.kept.get("voids")
    if kept is not None and kept[0] == stamp:
        return kept[1]
    found = _Voids({}, {})
    for tag, kind, newest in book.conn.execute(
        "SELECT upper(e.filter), e.kind = 'change', max(v.at_utc) "
        "FROM entries v INDEXED BY one_void_per_entry CROSS JOIN entries e ON e.id = v.voids "
        "WHERE v.voids IS NOT NULL AND e.filter IS NOT NULL GROUP BY 1, 2"
    ):
        found.any[tag] = max(found.any.get(tag, newest), newest)
        if kind:
            found.changes[tag] = newest
    book.kept["voids"] = (stamp, found)
    return found


def _encode(status: FilterStatus) -> str:
    return json.dumps(status.to_row(), ensure_ascii=False)


def _decode(text: str, now: datetime) -> FilterStatus:
    return FilterStatus.from_row(json.loads(text), now)


# ---- the kept rows' columns (schema version 7) ----------------------------------------------------
# What the watch list reads of a kept filter row, as plain columns beside `data` (the whole
# row): each is a piece of FilterStatus.to_row, so that `_from_lean` gives what `_decode` gives
# (tests/store/test_lean_rows.py holds them together, and to a computation, at several clocks).
LEAN_COLUMNS = (
    "unit", "kind", "gauge", "dp_bar", "dp_ref_bar", "temp_c", "indicator", "reading_at",
    "limit_bar", "bypass_bar", "clean_bar", "percent_of_limit", "due_earliest", "due_likely",
    "due_latest", "bypass_earliest", "bypass_likely", "bypass_latest", "basis", "flags",
    "readings_since_change", "changed_at", "reference", "cold_start_temp_c",
    "cold_dp_at_start_bar", "cold_bypass_bar", "cold_bypasses", "cold_bypass_below_c",
    "life_b10_h", "life_b50_h", "life_n_failed", "life_n_censored", "life_pooled", "spark",
    "overdue_at", "pace", "next_reading", "next_rule", "note_codes", "words", "words_check",
    "clock_valid_from", "clock_origin", "clock_meter_at", "clock_meter_age_h",
    "clock_meter_rate", "clock_due_ages", "clock_last_age_h", "clock_state",
    "clock_check_after_h", "clock_life_shape", "clock_life_scale_h", "clock_hot",
    "clock_max_temp_c",
)  # fmt: skip
_LEAN_SELECT = "lean, " + ", ".join(LEAN_COLUMNS)
_LEAN_MARKS = ", ".join("?" for _ in range(len(LEAN_COLUMNS) + 1))
_NONE2, _NONE3, _NONE5 = (None,) * 2, (None,) * 3, (None,) * 5
WORDS_APART = "\x1f"  # between the notes' words in `words` (no text of the book holds it)


def _json(value: Any) -> str | None:
    return None if value is None else json.dumps(value, ensure_ascii=False)


def _lean(status: FilterStatus, row: dict[str, Any]) -> list[Any] | None:
    """The columns of a kept row (`row`: status.to_row()), None where they would not hold
    its values as they are (a number that is not a number: SQLite keeps NaN as NULL)."""
    clock, due, bypass, cold, life = (
        row["clock"], row["due"], row["bypass_due"], row["cold"], row["life"],
    )  # fmt: skip
    if clock is None:
        return None
    words = [n.text("") for n in status.note_codes]
    check = [n.text("check-now") for n in status.note_codes]
    meter = clock["meter"]
    cols = [
        row["unit"], row["kind"], row["gauge"], row["dp_bar"], row["dp_ref_bar"],
        row["temp_c"], row["indicator"], row["reading_at"], row["limit_bar"],
        row["bypass_bar"], row["clean_bar"], row["percent_of_limit"],
        *((due["earliest"], due["likely"], due["latest"]) if due else _NONE3),
        *((bypass["earliest"], bypass["likely"], bypass["latest"]) if bypass else _NONE3),
        row["basis"], " ".join(row["flags"]), row["readings_since_change"], row["changed_at"],
        row["reference"],
        *((cold["start_temp_c"], cold["dp_at_start_bar"], cold["bypass_bar"],
           cold["bypasses"], cold["bypass_below_c"]) if cold else _NONE5),
        *((life["b10_h"], life["b50_h"], life["n_failed"], life["n_censored"],
           life["pooled"]) if life else _NONE5),
        array("d", status.spark).tobytes(), row["overdue_at"], row["pace"],
        row["next_reading"], row["next_rule"], _json(row["note_codes"]),
        WORDS_APART.join(words), None if check == words else WORDS_APART.join(check),
        clock["valid_from"], clock["origin"], *(meter or _NONE3), _json(clock["due_ages"]),
        clock["last_age_h"], clock["state"], clock["check_after_h"],
        *(clock["life"] or _NONE2), _json(clock["hot"] or None), clock["max_temp_c"],
    ]  # fmt: skip
    if any(isinstance(v, float) and math.isnan(v) for v in cols):
        return None
    if any(" " in f for f in row["flags"]) or any(WORDS_APART in w for w in words + check):
        return None
    if any(not isinstance(v, str) for v in [*words, *check]):
        return None
    return cols


_from_iso = datetime.fromisoformat
_loads = json.loads
_COMPARED = tuple(f.name for f in fields(FilterStatus) if f.compare)


class _Lean(FilterStatus):
    """A kept row's status as read by its columns: the fields the watch list, `status` and
    `status --json` show, and those only a few readers need (the notes' codes, the sparkline)
    decoded from the columns when first asked for. Equal to the same status decoded whole."""

    @cached_property
    def note_codes(self) -> tuple[Note, ...]:  # type: ignore[override]
        return tuple([Note.from_row(n) for n in _loads(self.__dict__["_note_codes"])])

    @cached_property
    def spark(self) -> tuple[float, ...]:  # type: ignore[override]
        points = array("d")
        points.frombytes(self.__dict__["_spark"])
        return tuple(points)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, FilterStatus):
            return NotImplemented
        return all(getattr(self, n) == getattr(other, n) for n in _COMPARED)

    __hash__ = FilterStatus.__hash__


def _due(earliest: str | None, likely: str, latest: str | None) -> Due | None:
    if earliest is None:
        return None
    return filled_record(
        Due,
        {
            "earliest": _from_iso(earliest),
            "likely": _from_iso(likely),
            "latest": _from_iso(latest) if latest else None,
        },
    )


def _words(text: str) -> list[str]:
    return text.split(WORDS_APART) if text else []


def _from_lean(cols: tuple, now: datetime) -> FilterStatus:
    """A kept row read by its columns (its tag first), brought to `now`: what `_decode` gives
    of its `data`, without decoding the whole row (the notes' words as kept, the clock's
    parts worked out straight from the columns)."""
    (
        tag, unit, kind, gauge, dp_bar, dp_ref_bar, temp_c, indicator, reading_at, limit_bar,
        bypass_bar, clean_bar, percent, due_e, due_l, due_x, bypass_e, bypass_l, bypass_x,
        basis, flags, readings, changed_at, reference, cold_t, cold_dp, cold_bypass_bar,
        cold_bypasses, cold_below, b10_h, b50_h, n_failed, n_censored, pooled, spark,
        overdue_at, pace, next_reading, next_rule, note_codes, words, words_check,
        valid_from, origin, meter_at, meter_age_h, meter_rate, due_ages, last_age_h, state,
        check_after_h, life_shape, life_scale_h, hot, max_temp_c,
    ) = cols  # fmt: skip
    if due_ages is None:
        clock = filled_record(
            Clock,
            {
                "valid_from": None if valid_from is None else _from_iso(valid_from),
                "origin": None if origin is None else _from_iso(origin),
                "meter": None
                if meter_at is None
                else (_from_iso(meter_at), meter_age_h, meter_rate),
                "due_ages": None,
                "last_age_h": last_age_h,
                "state": state,
                "check_after_h": check_after_h,
                "life": None if life_shape is None else (life_shape, life_scale_h),
                "hot": () if hot is None else tuple([(_from_iso(at), t) for at, t in _loads(hot)]),
                "max_temp_c": max_temp_c,
            },
        )
    else:
        clock = Clock.from_row(
            {
                "valid_from": valid_from,
                "origin": origin,
                "meter": None if meter_at is None else [meter_at, meter_age_h, meter_rate],
                "due_ages": _loads(due_ages),
                "last_age_h": last_age_h,
                "state": state,
                "check_after_h": check_after_h,
                "life": None if life_shape is None else [life_shape, life_scale_h],
                "hot": [] if hot is None else _loads(hot),
                "max_temp_c": max_temp_c,
            }
        )
    # The dates as kept, where clock_parts does not date them again from the due ages (both)
    # or from the service life (the change's).
    bypass_due = None if due_ages is not None else _due(bypass_e, bypass_l, bypass_x)
    due = None if due_ages is not None or life_shape is not None else _due(due_e, due_l, due_x)
    said = _words(words)
    kept_words = (said, said if words_check is None else _words(words_check))
    overdue = None if overdue_at is None else _from_iso(overdue_at)
    flags_then = tuple(flags.split()) if flags else ()
    gauge = bool(gauge)
    timed = clock_parts(flags_then, (), due, bypass_due, gauge, overdue, clock, now, kept_words)
    return filled_record(
        _Lean,
        {
            "filter": tag,
            "unit": unit,
            "kind": kind,
            "gauge": gauge,
            "dp_bar": dp_bar,
            "dp_ref_bar": dp_ref_bar,
            "temp_c": temp_c,
            "indicator": indicator,
            "reading_at": None if reading_at is None else _from_iso(reading_at),
            "limit_bar": limit_bar,
            "bypass_bar": bypass_bar,
            "clean_bar": clean_bar,
            "percent_of_limit": percent,
            "due": timed["due"],
            "bypass_due": timed["bypass_due"],
            "basis": basis,
            "state": timed["state"],
            "flags": timed["flags"],
            "notes": timed["notes"],
            "readings_since_change": readings,
            "changed_at": None if changed_at is None else _from_iso(changed_at),
            "element_age_h": timed["element_age_h"],
            "reference": reference,
            "cold": None
            if cold_t is None
            else filled_record(
                ColdStart,
                {
                    "start_temp_c": cold_t,
                    "dp_at_start_bar": cold_dp,
                    "bypass_bar": cold_bypass_bar,
                    "bypasses": bool(cold_bypasses),
                    "bypass_below_c": cold_below,
                },
            ),
            "life": None
            if b10_h is None
            else filled_record(
                LifeSummary,
                {
                    "b10_h": b10_h,
                    "b50_h": b50_h,
                    "n_failed": n_failed,
                    "n_censored": n_censored,
                    "pooled": bool(pooled),
                },
            ),
            "history": (),  # no kept row has it
            "overdue_at": overdue,
            "pace": pace,
            "next_reading": None if next_reading is None else _from_iso(next_reading),
            "next_rule": next_rule,
            "forecast": None,
            "age_to_time": None,
            "clock": clock,
            "_note_codes": note_codes,
            "_spark": spark,
        },
    )


def filter_view(book: Book, tag: str, now: datetime | None = None) -> tuple[FilterStatus, Elements]:
    """What the filter sheet shows, now: the full status (curve, history, forecast, which no
    kept row holds) and every element's summary, from the element cache and the entries since
    the last change (no rereading of the position's history; nothing written). The next
    reading is the kept row's where that holds (the list shows the same; working it out again
    is a second forecast, half of a sheet's time on a long history)."""
    with read_snapshot(book.conn):  # the kept row and the entries as of one state of the book
        ctx = context(book, tag)
        els = elements_now(book, ctx)
        now = now or book.now()
        kept = lean_filters(book, [ctx.position.tag.upper()], now).get(ctx.position.tag.upper())
        like = partial(like_lives, book, ctx, None)  # read only if its own lives are too few
        status = status_from(ctx, els.past, els.current, now, like, _kept_plan(kept))
    return status, els


def _kept_plan(kept: FilterStatus | None) -> Plan | None:
    if kept is None:
        return None
    return Plan(kept.next_reading, kept.next_rule, kept.overdue_at)


# ---- live status ---------------------------------------------------------------------------------


def live_status(
    book: Book,
    ctx: FilterContext,
    now: datetime | None = None,
    like: LikeLives | None = None,
    keep: bool = False,
) -> tuple[FilterStatus, bool]:
    """One filter's status now (the same as `filter_status` computes from every live entry)
    and whether its removed elements changed. `keep`: bring the element cache up to date (the
    write path and a refresh only, inside their transaction); otherwise nothing is written."""
    now = now or book.now()
    els = elements_now(book, ctx, keep=keep)
    if like is None:
        like = partial(like_lives, book, ctx, None)  # read only if its own lives are too few
    status = status_from(ctx, els.past, els.current, now, like)
    return status, els.changed


def after_entry(book: Book, entry: Entry, reg: Register | None = None) -> FilterStatus | None:
    """Called inside the write transaction: keep the status of the filter the entry touches
    and of the unit whose fluid-care status it can change. (Like positions that lean on this
    one's lives no longer match their key: a reader computes them until a refresh keeps
    them.) `reg`: the register as read once for the whole save. Returns the filter's status
    as kept (None when the entry is on no filter)."""
    unit = _touches_unit(book, entry)
    if unit:
        refresh_unit(book, unit, reg=reg)
    tag = getattr(entry, "filter", None)
    if isinstance(entry, Void):
        row = book.conn.execute("SELECT filter FROM entries WHERE id = ?", [entry.voids]).fetchone()
        tag = row[0] if row else None
    if not tag:
        return None
    seen = max_rowid(book)
    status, _ = live_status(book, context(book, tag), keep=True)
    store_status(book, status, book.now(), seen, reg)
    return status


def move_seen_on(book: Book, reg: Register | None = None) -> None:
    """Inside a save's transaction, after its rows were kept: every kept row whose inputs the
    entries written since it was checked left as they were is checked up to the newest entry
    now (so that a reader compares only what was written after). Rows whose inputs moved keep
    their rowid, and a reader computes them; so do rows whose key does not match the register
    as it is (what touched them is judged by the register, which an undone edit brings back
    to their key).

    After a save nearly every row stands at one rowid, the newest entry before the save
    (`last`): the few positions and units the entries written since touch are worked out from
    those entries, and every other row at `last` is moved on by one statement that leaves
    them out. Rows further behind (their inputs moved earlier and they wait for a refresh)
    are read and checked one by one, each against what was written after its own rowid: the
    same rule for every row, whichever way it is applied."""
    conn = book.conn
    newest = max_rowid(book)
    oldest, last = conn.execute(
        "SELECT min(seen_rowid), max(seen_rowid) FROM kept_seen WHERE seen_rowid < ?", [newest]
    ).fetchone()
    if last is None:
        return
    older = []
    if oldest < last:
        older = conn.execute(
            "SELECT what, upper(tag), seen_rowid FROM kept_seen WHERE seen_rowid < ?", [last]
        ).fetchall()
    moved = _moved_since(book, min((seen for _, _, seen in older), default=last))
    reg = reg or register(book)
    units = set(moved.unit_events) | set(moved.unit_hot) | set(moved.unit_any)
    firsts = _firsts(book, [u for u in units if u in moved.unit_any])
    # A row whose key no longer matches the register stays where it is: what touches its
    # inputs is judged by the register as it is now (like positions, a unit's temperature
    # limit), not as the row's key has it, and an edit undone makes the key match again (an
    # element change on a position that was not alike then would be passed over).
    stale = _unkeyed(book, reg)

    def unit_moved(tag: str, seen: int) -> bool:
        return tag in units and moved.unit_moved(
            tag, seen, reg.unit_limits.get(tag), firsts.get(tag)
        )

    # the rows at `last`: those the entries since moved, and one statement for the others
    touched = {t for t, r in moved.own.items() if r > last} | stale["filter"]
    groups = {reg.like[t] for t, r in moved.changes.items() if r > last and t in reg.like}
    leaning = {t for group in groups for t in group} - touched
    touched |= {t for t, pools in _pools(book, leaning).items() if pools}
    left_units = {u for u in units if unit_moved(u, last)} | stale["unit"]
    left = {"filter": sorted(touched), "unit": sorted(left_units)}
    sql, params = "UPDATE kept_seen SET seen_rowid = ? WHERE seen_rowid = ?", [newest, last]
    for what, tags in left.items():
        if tags:
            tags_sql, tags_params = _among(tags)
            sql += f" AND NOT (what = '{what}' AND tag IN {tags_sql})"
            params += tags_params
    conn.execute(sql, params)
    if not older:
        return
    # the rows further behind, one by one
    pools = _pools(book, {t for what, t, _ in older if what == "filter"}) if moved.changes else {}
    good = {
        "filter": [
            t
            for what, t, seen in older
            if what == "filter"
            and t not in stale["filter"]
            and not moved.filter_moved(t, seen, pools.get(t, True), reg.like.get(t, ()))
        ],
        "unit": [
            t
            for what, t, seen in older
            if what == "unit" and t not in stale["unit"] and not unit_moved(t, seen)
        ],
    }
    for what, tags in good.items():
        if tags:
            tags_sql, tags_params = _among(tags)
            conn.execute(
                "UPDATE kept_seen SET seen_rowid = ? WHERE what = ? AND seen_rowid < ? "
                f"AND tag IN {tags_sql}",
                [newest, what, last, *tags_params],
            )


def _unkeyed(book: Book, reg: Register) -> dict[str, set[str]]:
    """The kept filter and unit rows (upper-case tags) whose key does not match the register
    as it is: no reader uses them, and they wait for a refresh."""
    filters = {
        tag.upper()
        for tag, key in book.conn.execute("SELECT filter, key FROM status_cache")
        if key != reg.filter_key(tag.upper(), _leans(key))
    }
    units = {
        tag.upper()
        for tag, key in book.conn.execute("SELECT unit, key FROM unit_cache")
        if key != reg.unit_key(tag.upper())
    }
    return {"filter": filters, "unit": units}


def _among(tags: Sequence[str]) -> tuple[str, list[str]]:
    """The SQL of `IN` a list of tags and its parameters: placeholders for a few (a save
    touches one or two), one JSON array for many (no limit on parameters)."""
    if len(tags) <= 20:
        return f"({', '.join('?' for _ in tags)})", list(tags)
    return "(SELECT value FROM json_each(?))", [json.dumps(list(tags))]


def _pools(book: Book, tags: Iterable[str]) -> dict[str, bool]:
    """Whether each kept row of `tags` (upper case) leans on like positions' lives (True
    where no row is kept, as a reader would take it)."""
    tags = sorted(tags)
    if not tags:
        return {}
    sql, params = _among(tags)
    found = {
        tag.upper(): not key.endswith(".own")
        for tag, key in book.conn.execute(
            f"SELECT filter, key FROM status_cache WHERE filter IN {sql}", params
        )
    }
    return {tag: found.get(tag, True) for tag in tags}


def _firsts(book: Book, units: Sequence[str]) -> dict[str, str | None]:
    """The first entry's time each kept unit row holds, by upper-case tag (none kept: left
    out)."""
    if not units:
        return {}
    sql, params = _among(sorted(units))
    return dict(
        book.conn.execute(
            "SELECT upper(unit), json_extract(data, '$.first_at') FROM unit_cache "
            f"WHERE unit IN {sql}",
            params,
        )
    )


def _inputs_seen(book: Book) -> tuple[int, int]:
    """What a status is computed from, as two counters that only grow: the newest entry's
    rowid (entries are never deleted) and the newest register change's."""
    row = book.conn.execute(
        "SELECT (SELECT coalesce(max(rowid), 0) FROM entries), "
        "(SELECT coalesce(max(rowid), 0) FROM register_log)"
    ).fetchone()
    return row[0], row[1]


def refresh(book: Book, ctx: FilterContext, reg: Register | None = None) -> FilterStatus:
    """An explicit refresh: recompute one filter's status now and keep it (with its element
    summaries) in one transaction, or in the caller's.

    The fitting runs before the write lock so that a writer is not held up by it; under the
    lock the inputs are compared with what the fitting saw, and if an entry or a register
    change landed in between, the status is computed again there: a kept row never holds a
    view of the entries older than the moment it is stored. `reg`: the register as read
    together with `ctx` (a row keyed with an older register than it was computed from
    would only fail its key)."""
    now = book.now()
    seen = _inputs_seen(book)
    status, _ = live_status(book, ctx, now)  # the fitting, before the write lock
    with book.atomic():
        if _inputs_seen(book) != seen:
            ctx, reg = context(book, ctx.position.tag), None
            seen = _inputs_seen(book)
            status, _ = live_status(book, ctx, now, keep=True)
        else:
            elements_now(book, ctx, keep=True)
        store_status(book, status, now, seen[0], reg)
    return status


def stale_filters(book: Book) -> list[str]:
    """Tags whose kept status does not hold now (missing, another key, inputs written since):
    what a refresh should recompute (no contexts built)."""
    rows = _kept_rows(book)
    check = Check(book, rows)
    now = book.now()
    tags = book.conn.execute("SELECT tag FROM filters ORDER BY tag")
    return [tag for (tag,) in tags if check.holds(tag.upper(), now) is None]


def watch_filters(
    book: Book, positions: Sequence[FilterPosition], now: datetime, reg: Register | None = None
) -> tuple[list[FilterStatus], list[str]]:
    """Each position's status at `now`: its kept row where that holds (read as it is, no
    context built), else computed in memory (nothing written); and the tags of those
    computed (the ones `stale_filters` names). Only when one must be computed are the
    plant's contexts built (they resolve each fluid's curve, which may load scipy), so the
    list read from rows that hold loads none of the fitting maths
    (tests/cli/test_lean_path.py)."""
    kept = lean_filters(book, [p.tag.upper() for p in positions], now, reg=reg)
    result: list[FilterStatus] = []
    computed: list[str] = []
    ctxs: dict[str, FilterContext] | None = None
    for position in positions:
        status = kept.get(position.tag.upper())
        if status is None:
            if ctxs is None:
                ctxs = {tag.upper(): c for tag, c in contexts(book).items()}
            status = live_status(book, ctxs[position.tag.upper()], now)[0]
            computed.append(position.tag)
        result.append(status)
    return result, computed


def kept_filters(
    book: Book, tags: Iterable[str], now: datetime, reg: Register | None = None
) -> dict[str, FilterStatus]:
    """The kept status at `now` of each of `tags` (upper case) whose row holds then (its key
    matches), by tag; the rest are left out. `reg`: the register as read for the same list."""
    tags = list(tags)
    rows = _kept_rows(book, tags)
    check = Check(book, rows, reg)
    out = {}
    for tag in tags:
        row = check.holds(tag, now)
        if row is not None:
            out[tag] = _decode(row.data, now)
    return out


# The rows an audit may take, a filter's row kept now and then those kept before it, each
# with the rowid it was checked up to: only those whose inputs are all dated by the time asked
# (`newest_utc`) and not checked up to a rowid too far behind (EARLIER_SCAN).
_ROWS_NOW = (
    "SELECT upper(c.filter), s.seen_rowid, c.key, c.data FROM status_cache c JOIN kept_seen s "
    "ON s.what = 'filter' AND s.tag = c.filter WHERE (c.newest_utc IS NULL OR c.newest_utc <= "
    "?) AND s.seen_rowid >= ? AND c.filter IN {tags}"
)
_ROWS_EARLIER = (
    "SELECT upper(filter), seen_rowid, key, data FROM status_earlier WHERE (newest_utc IS NULL "
    "OR newest_utc <= ?) AND seen_rowid >= ? AND filter IN {tags} ORDER BY filter, "
    "seen_rowid DESC"
)


def kept_as_of(
    book: Book, tags: Iterable[str], at: datetime, reg: Register | None = None
) -> dict[str, FilterStatus]:
    """The status as of `at` (an audit: as the entries stood then) of each of `tags` (upper
    case) that one of its kept rows stands for, by tag; the rest are left out. The row kept
    now is asked first, then those kept before it (`_keep_earlier`), newest first. A row
    stands for `at` where its key holds now, every input it was computed from is dated at or
    before `at` (`newest_utc`; so also a row kept later, the previous shift's log read after
    the shift: its clock is good from its newest reading on, status_model.Clock), and no
    entry written after its seen rowid that touches its inputs (an entry of the position or
    a void of one; where it leans on like positions, their element changes and voids of
    them) is dated before `at` + 1 s, which is what an audit counts: its inputs then are the
    row's."""
    stamp = format_utc(at)
    until = format_utc(at + timedelta(seconds=1))
    # A row checked up to a rowid far behind (kept while its inputs had moved and nothing
    # refreshed it) would cost a read of every entry since: it is left to the computation.
    floor = max_rowid(book) - EARLIER_SCAN
    reg = reg or register(book)
    out: dict[str, FilterStatus] = {}
    for sql in (_ROWS_NOW, _ROWS_EARLIER):
        left = sorted(set(tags) - out.keys())
        if not left:
            break
        tags_sql, params = _among(left)
        rows: dict[str, list[tuple]] = {}
        for tag, *row in book.conn.execute(sql.format(tags=tags_sql), [stamp, floor, *params]):
            rows.setdefault(tag, []).append(row)
        if not rows:
            continue
        oldest = min(seen for found in rows.values() for seen, _, _ in found)
        moved = _moved_since(book, oldest, before=until)  # only what counts at `at`
        for tag, found in rows.items():
            for seen, key, data in found:
                pools = _leans(key)
                if key == reg.filter_key(tag, pools) and not moved.filter_moved(
                    tag, seen, pools, reg.like.get(tag, ())
                ):
                    out[tag] = _decode(data, at)
                    break
    return out


def lean_filters(
    book: Book, tags: Iterable[str], now: datetime, reg: Register | None = None
) -> dict[str, FilterStatus]:
    """`kept_filters(book, tags, now, reg=reg)` (the rows that hold now, not an audit), read
    by their columns in one query: no row's `data` decoded but where its columns cannot
    stand for it (`lean` 0)."""
    tags = list(tags)
    rows = _kept_rows(book, tags, lean=True)
    check = Check(book, rows, reg)
    out, whole = {}, []
    for tag in tags:
        row = check.holds(tag, now)
        if row is None:
            continue
        if row.cols:
            out[tag] = _from_lean(row.cols, now)
        else:
            whole.append(tag)
    if whole:
        sql, params = _among(whole)
        for tag, data in book.conn.execute(
            f"SELECT upper(filter), data FROM status_cache WHERE filter IN {sql}", params
        ):
            out[tag] = _decode(data, now)
    return out


def kept_units(
    book: Book,
    units: Sequence[Unit],
    filters_by_unit: dict[str, list[FilterPosition]],
    now: datetime,
    reg: Register | None = None,
) -> dict[str, UnitStatus]:
    """The status at `now` of each unit whose kept row holds then (its key matches, kept at
    or before `now`, no input dated in between), by upper-case tag; the rest are left out."""
    reg = reg or register(book)
    seen = _seen(book, "unit")
    rows = {
        r[0].upper(): r[1:]
        for r in book.conn.execute(
            "SELECT unit, key, computed_utc, until_utc, data FROM unit_cache"
        )
    }
    oldest = min(seen.values(), default=0)
    newest = max_rowid(book)
    moved = _moved_since(book, oldest) if oldest < newest else None
    stamp = format_utc(now)
    out = {}
    for unit in units:
        tag = unit.tag.upper()
        row = rows.get(tag)
        if row is None or tag not in seen:
            continue
        key, computed, until, data = row
        # the times first: a row kept after `now` or holding only until before it is left
        # out without its key's digest
        if stamp < computed or (until is not None and stamp >= until):
            continue
        if key != reg.unit_key(tag):
            continue
        row_data = json.loads(data)
        if (
            seen[tag] < newest
            and moved is not None
            and moved.unit_moved(tag, seen[tag], reg.unit_limits.get(tag), row_data["first_at"])
        ):
            continue
        inputs = UnitInputs.from_row(row_data)
        out[tag] = unit_status_from(unit, filters_by_unit.get(tag, []), inputs, now)
    return out


def refresh_stale(book: Book, limit: int | None = None) -> list[str]:
    """The explicit refresh behind a watch list: recompute (at most `limit`) rows that do not
    hold now, and keep them, each in its own transaction. A read-only book is left as it is.
    Returns the tags done."""
    if book.readonly:
        return []
    reg, ctxs = register(book), contexts(book)
    tags = stale_filters(book)[:limit]
    for tag in tags:
        refresh(book, ctxs[tag.upper()], reg)
    units = _stale_units(book)
    if units:
        with book.atomic():
            reg = register(book)
            for tag in units:
                refresh_unit(book, tag, reg=reg)
    return tags


# ---- units ---------------------------------------------------------------------------------------


def _store_unit(book: Book, tag: str, clock: UnitClock, key: str, seen: int) -> None:
    """Keep one unit's row, with the first input dated after it was computed (it holds
    until then)."""
    stamp = format_utc(clock.valid_from)
    conn = book.conn
    later = [
        conn.execute(
            "SELECT min(at_utc) FROM entries WHERE unit = ? AND at_utc > ?", [tag, stamp]
        ).fetchone()[0],
        conn.execute(
            "SELECT min(v.at_utc) FROM entries v INDEXED BY one_void_per_entry "
            "CROSS JOIN entries e ON e.id = v.voids WHERE v.voids IS NOT NULL AND e.unit = ? "
            "AND v.at_utc > ?",
            [tag, stamp],
        ).fetchone()[0],
    ]
    conn.execute(
        "INSERT OR REPLACE INTO unit_cache(unit, key, computed_utc, until_utc, data) "
        "VALUES (?, ?, ?, ?, ?)",
        [
            tag,
            key,
            stamp,
            min((d for d in later if d), default=None),
            json.dumps(clock.to_row(), ensure_ascii=False),
        ],
    )
    _store_seen(book, "unit", [tag], seen)


def _stale_units(book: Book) -> list[str]:
    """Units whose kept row does not hold now."""
    units = list_all(book, Unit)
    by_unit: dict[str, list[FilterPosition]] = {}
    for position in list_all(book, FilterPosition):
        by_unit.setdefault(position.unit.upper(), []).append(position)
    kept = kept_units(book, units, by_unit, book.now())
    return [u.tag for u in units if u.tag.upper() not in kept]


def cached_units(
    book: Book,
    units: Sequence[Unit],
    filters_by_unit: dict[str, list[FilterPosition]],
    now: datetime,
    reg: Register | None = None,
) -> list[UnitStatus]:
    """Every unit's status at `now`: from its kept row where that holds, else computed in
    memory (nothing is written)."""
    kept = kept_units(book, units, filters_by_unit, now, reg)
    result = []
    for unit in units:
        status = kept.get(unit.tag.upper())
        if status is None:
            filters = filters_by_unit.get(unit.tag.upper(), [])
            status = unit_at(unit, filters, unit_clock(book, unit, now), now)
        result.append(status)
    return result


def refresh_unit(
    book: Book, tag: str, now: datetime | None = None, reg: Register | None = None
) -> UnitStatus | None:
    """Recompute one unit's kept entries and keep them (in a save: in its transaction)."""
    unit = find(book, Unit, tag)
    if unit is None:
        return None
    now = now or book.now()
    filters = list_all(book, FilterPosition, unit.tag)
    with book.atomic():
        seen = max_rowid(book)
        clock = unit_clock(book, unit, now)
        key = (reg or register(book)).unit_key(unit.tag.upper())
        _store_unit(book, unit.tag, clock, key, seen)
    return unit_at(unit, filters, clock, now)


def _touches_unit(book: Book, entry: Entry) -> str | None:
    """The unit whose status this entry can change: top-ups and samples (and a void of
    anything) always, a reading if it is hot, anything dated at or before the unit's first
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


@frozen_record
class _Rebuilt:
    tag: str
    context: str
    seen_rowid: int
    elements: list[tuple[str, str, bytes]]  # (removal id, data, curve) oldest first
    last_change: str | None
    last_change_utc: str | None
    status: FilterStatus
    register: Register


def _compute(book: Book, tags: Sequence[str], now: datetime) -> list[_Rebuilt]:
    """Every derived row of these positions from the entries (one read snapshot)."""
    ctxs = contexts(book)
    positions = list_all(book, FilterPosition)
    changes = live_changes(book, None)
    seen = max_rowid(book)
    reg = register(book)
    out = []
    for tag in tags:
        ctx = ctxs[tag.upper()]
        past, current = split_summaries(ctx, element_items(book, ctx.position.tag))
        like = partial(like_lives_from, changes, positions, ctx)
        last = past[-1] if past else None
        out.append(
            _Rebuilt(
                ctx.position.tag,
                context_key(ctx),
                seen,
                [(el.removal_id, *encode_element(el)) for el in past],
                last.removal_id if last else None,
                format_utc(last.removed_at) if last else None,
                status_from(ctx, past, current, now, like),
                reg,
            )
        )
    return out


def _compute_in_snapshot(book: Book, tags: Sequence[str], now: datetime) -> list[_Rebuilt]:
    with read_snapshot(book.conn):
        return _compute(book, tags, now)


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
        store_status(book, r.status, now, r.seen_rowid, r.register)


def rebuild(book: Book) -> int:
    """Drop and recompute the derived tables (element summaries and statuses) from the entries
    (in this process: no worker processes, see DEVELOPERS.md "Keeping it quick")."""
    now = book.now()
    tags = [ctx.position.tag for ctx in contexts(book).values()]
    with book.atomic():
        for table in (
            "element_state", "element_cache", "status_cache", "status_earlier", "unit_cache",
            "kept_seen",
        ):  # fmt: skip
            book.conn.execute(f"DELETE FROM {table}")
    rows = _compute_in_snapshot(book, tags, now)
    for i in range(0, len(rows), WRITE_CHUNK):
        with book.atomic():
            _store_rebuilt(book, rows[i : i + WRITE_CHUNK], now)
    with book.atomic():
        reg = register(book)
        for unit in list_all(book, Unit):
            refresh_unit(book, unit.tag, now, reg)
        # Entries written while we computed: the rows they touch no longer match their key
        # and stay behind (a reader computes them); every other row is checked up to now.
        move_seen_on(book, reg)
    return len(rows)
