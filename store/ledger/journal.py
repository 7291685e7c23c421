"""Entries in the book: validating one, appending its row, voids, reading them back. Writes
here touch the entries table only; a save goes through store.record."""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Callable, Iterable, Sequence
from dataclasses import fields, replace
from datetime import datetime
from typing import Any, NamedTuple

from store.base import validate as validate_value
from store.base.collector import collector_held
from store.base.errors import BookError
from store.base.timeutil import format_utc, parse_utc, utc_now
from store.base.validate import ENTRY_KINDS, INDICATOR_STATES
from store.db.book import Book
from store.ledger.entries import (
    KINDS,
    BreatherSwap,
    ElementChange,
    Entry,
    Reading,
    Sample,
    TopUp,
    Void,
    entry_columns,
)
from store.ledger.register import (
    Breather,
    FilterPosition,
    Fluid,
    Technician,
    Unit,
    get,
)
from store.physics.cleanliness import code_from_counts, parse_code

MAX_DP_BAR = validate_value.RANGES["dp_bar"].high  # a filter ΔP above this is a typo
TEMP_RANGE_C = (validate_value.RANGES["temp_c"].low, validate_value.RANGES["temp_c"].high)
MAX_NOTE_CHARS = validate_value.MAX_NOTE_CHARS
CHANGE_REASONS = validate_value.CHANGE_REASONS
BREATHER_REASONS = validate_value.BREATHER_REASONS


def _finite(name: str, value: float | None) -> None:
    validate_value.number(name, value)


def _text(name: str, value: str, limit: int | None = None) -> str:
    return validate_value.text(name, value, limit, multiline=name == "note")


def _target_problem(book: Book, entry: Entry) -> str:
    """Why the entry's filter, breather or unit tag is not in the register ("" when it is)."""
    cls = {"filters": FilterPosition, "breathers": Breather}.get(entry.target_table)
    tag = entry.target if cls is not None else entry.unit
    if cls is None and entry.target_table == "units" and entry.unit:
        cls = Unit
    if cls is None or not tag:
        return ""
    try:
        get(book, cls, tag)
    except BookError as exc:
        return str(exc)
    return ""


def validate(book: Book, entry: Entry, now: datetime | None = None, history: bool = False) -> Entry:
    """Return the entry completed (tags normalised, unit filled) or raise BookError.
    `history`: an entry made earlier elsewhere (a merge): its technician may have been
    marked inactive since; every other check still applies."""
    now = now or book.now()
    changes: dict[str, Any] = {}
    if not entry.by:
        raise BookError("who made this entry? give the technician's initials")
    try:
        tech = get(book, Technician, entry.by)
    except BookError as exc:
        # The tag typed or scanned is said first (with its suggestion): a mistyped 'M1R'
        # was answered only with "unknown technician".
        target = _target_problem(book, entry)
        raise BookError(f"{target}; also {exc}" if target else str(exc)) from None
    if not tech.active and not history:
        raise BookError(
            f"technician {tech.tag} is marked inactive: sign in as someone else, or make "
            f"them active again (sumpbook register change tech {tech.tag} active=yes)"
        )
    changes["by"] = tech.tag
    at = entry.at or now
    if not isinstance(at, datetime) or at.tzinfo is None:
        raise BookError("the time must be a UTC time")
    validate_value.moment(at, now)
    changes["at"] = at.replace(microsecond=0)
    changes["note"] = _text("note", entry.note)

    table = entry.target_table
    if table == "filters":
        position = get(book, FilterPosition, entry.target or "")
        changes["filter"], changes["unit"] = position.tag, position.unit
    elif table == "breathers":
        breather = get(book, Breather, entry.target or "")
        changes["breather"], changes["unit"] = breather.tag, breather.unit
    elif table == "units":
        if entry.unit:
            changes["unit"] = get(book, Unit, entry.unit).tag
        elif not isinstance(entry, KINDS["note"]):
            raise BookError(f"a {entry.kind} entry needs a unit tag")

    for name in validate_value.ENTRY_NUMBERS:
        if hasattr(entry, name):
            _finite(name, getattr(entry, name))
    if isinstance(entry, Reading):
        if entry.dp_bar is None and entry.indicator is None:
            raise BookError("a reading needs a ΔP value or an indicator state")
        if entry.indicator is not None and entry.indicator not in INDICATOR_STATES:
            raise BookError(f"indicator must be one of {', '.join(INDICATOR_STATES)}")
    elif isinstance(entry, ElementChange):
        if entry.reason not in CHANGE_REASONS:
            raise BookError(f"change reason must be one of {', '.join(CHANGE_REASONS)}")
        changes["condition"] = _text("condition", entry.condition)
        changes["batch"] = _text("batch", entry.batch)
    elif isinstance(entry, BreatherSwap):
        if entry.reason not in BREATHER_REASONS:
            raise BookError(f"swap reason must be one of {', '.join(BREATHER_REASONS)}")
        changes["condition"] = _text("condition", entry.condition)
    elif isinstance(entry, TopUp):
        if entry.volume_l is None:
            raise BookError("a top-up needs a volume")
        fluid = entry.fluid or get(book, Unit, changes["unit"]).fluid
        changes["fluid"] = get(book, Fluid, fluid).tag if fluid else None
    elif isinstance(entry, Sample):
        changes.update(_sample_fields(entry))
    elif isinstance(entry, Void):
        if not changes["note"]:
            raise BookError("say why the entry is voided")
        changes["voids"] = _voidable(book, entry.voids)
    return replace(entry, **changes)


def topup_filtration(unfiltered: bool, filtered_um: float | None) -> float | None:
    """A top-up's filtration as stored (None = unfiltered). A cart rating given with
    'unfiltered' cannot both be true: refused, never silently dropped."""
    if unfiltered:
        if filtered_um is not None:
            raise BookError(
                "an unfiltered top-up has no cart rating: clear the rating, or say it went "
                "through a filter cart"
            )
        return None
    if filtered_um is None:
        raise BookError("give the cart's rating in µm, or say the oil went in unfiltered")
    return validate_value.number("filtered_um", filtered_um)


BYPASS_OPEN = "the bypass valve is open and unfiltered oil is passing to the system"
BYPASS_STEPS = (
    "Change the element as soon as it can be done safely; do not run on for long.",
    "Before opening the housing: isolate and lock out, relieve pressure, let hot oil cool.",
    "Follow site procedures and the equipment maker's manual; they come first.",
)


def past_bypass(position: FilterPosition, dp_bar: float | None, indicator: str | None) -> bool:
    """A reading that says oil is going round the element: the indicator shows bypass, or
    the gauge ΔP has reached the bypass valve's setting (it cracks open there)."""
    if indicator == "bypass":
        return True
    return dp_bar is not None and position.bypass_bar is not None and dp_bar >= position.bypass_bar


def bypass_head(
    position: FilterPosition,
    dp_bar: float | None,
    indicator: str | None,
    pressure: Callable[[float], str] = lambda bar: f"{bar:g} bar",
) -> str | None:
    """What says the bypass is open ('ΔP 4 bar is at or over the bypass setting (3.5 bar)',
    or the indicator), pressures written by `pressure`; None when nothing does. Such a reading
    can be true, so it is saved; it is urgent, so the CLI says so and the app asks first."""
    if not past_bypass(position, dp_bar, indicator):
        return None
    if dp_bar is not None and position.bypass_bar is not None and dp_bar >= position.bypass_bar:
        return (
            f"ΔP {pressure(dp_bar)} is at or over the bypass setting "
            f"({pressure(position.bypass_bar)})"
        )
    return "The indicator shows bypass"


def reading_over_bypass(
    book: Book,
    filter_tag: str,
    dp_bar: float | None,
    indicator: str | None = None,
    pressure: Callable[[float], str] = lambda bar: f"{bar:g} bar",
) -> str | None:
    """The caution, as one paragraph, for a reading that says the bypass is open, else None."""
    position = get(book, FilterPosition, filter_tag)
    head = bypass_head(position, dp_bar, indicator, pressure)
    if head is None:
        return None
    return f"{position.tag}: {head}: {BYPASS_OPEN}. " + " ".join(BYPASS_STEPS)


def _sample_fields(entry: Sample) -> dict[str, Any]:
    for name in ("c4_per_ml", "c6_per_ml", "c14_per_ml", "water_ppm"):
        _finite(name, getattr(entry, name))
    if entry.code is not None:
        _text("code", entry.code)
    counts = (entry.c4_per_ml, entry.c6_per_ml, entry.c14_per_ml)
    code = str(parse_code(entry.code)) if entry.code else None
    if entry.c6_per_ml is not None and entry.c14_per_ml is not None:
        from_counts = str(code_from_counts(*counts))
        if code and code != from_counts:
            raise BookError(f"code {code} does not match the counts (they give {from_counts})")
        code = from_counts
    elif any(c is not None for c in counts):
        raise BookError("give counts at ≥6 and ≥14 µm(c) (and ≥4 µm(c) if counted)")
    if code is None and entry.water_ppm is None:
        raise BookError("a sample needs particle counts, a code or a water content")
    return {"code": code}


def _voidable(book: Book, entry_id: str) -> str:
    """The full id of the entry a void names. Read from the row's id, kind and voids only,
    so an entry whose other values cannot be read (a damaged row) can still be voided."""
    key = (entry_id or "").strip().lower()
    if len(key) < 6:
        raise BookError("give at least the first 6 characters of the entry id")
    rows = book.conn.execute(
        "SELECT e.id, e.kind, v.id FROM entries e LEFT JOIN entries v ON v.voids = e.id "
        "WHERE e.id >= ? AND e.id < ? LIMIT 2",
        [key, key + "\uffff"],
    ).fetchall()
    if not rows:
        raise BookError(f"no entry with id {validate_value.one_line(entry_id, 40)}")
    if len(rows) > 1:
        raise BookError(f"id {entry_id} is ambiguous: give more characters")
    target_id, kind, voided_by = rows[0]
    if kind == "void":
        raise BookError("a void cannot be voided: log the entry again instead")
    if voided_by is not None:
        raise BookError(f"entry {target_id[:8]} is voided already")
    try:  # a void names its entry by the id the book writes (the book's own CHECK says so)
        validate_value.entry_id(target_id)
    except BookError:
        raise BookError(
            f"entry {validate_value.one_line(target_id, 40)} has an id sumpbook does not make "
            "(it was written outside sumpbook), so no void can name it: listings already "
            "leave it out; to be rid of it, restore a backup from before it was written"
        ) from None
    return target_id


def _row(entry: Entry) -> dict[str, Any]:
    row = {name: getattr(entry, name) for name in entry_columns(type(entry))}
    row["kind"] = entry.kind
    row["at_utc"] = format_utc(entry.at)  # type: ignore[arg-type]
    row["logged_utc"] = format_utc(entry.logged or utc_now())
    return row


def insert(book: Book, entry: Entry) -> None:
    """Write one validated entry inside the caller's transaction (its own row only: the
    derived rows are kept by store.record, which every save goes through)."""
    row = _row(entry)
    columns = ", ".join(row)
    marks = ", ".join("?" for _ in row)
    try:
        book.conn.execute(f"INSERT INTO entries ({columns}) VALUES ({marks})", list(row.values()))
    except sqlite3.IntegrityError as exc:
        raise BookError(f"the book refused the entry: {exc}") from exc


def count(book: Book) -> int:
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


# ---- reading --------------------------------------------------------------------------------------
# Entries are built straight from row tuples (no per-row dict, no strptime): on a book of
# millions of entries reading is most of the cost of a status. `from_row` stays the
# reference for what an entry read back looks like; `_entry` gives the same objects.

_FIELDS = tuple(dict.fromkeys(name for cls in KINDS.values() for name in entry_columns(cls)))
_COLUMNS = ("kind", "at_utc", "logged_utc", *_FIELDS)
# A row whose numbers are not numbers or texts not texts (stored past the schema's checks, by
# hand) reads back
# with no time (`_SOUND_AT`): building it fails, so every reader notes it and skips it, at the
# cost of a type test in SQLite rather than one per value in Python. Each test is "empty, or
# of its kind", told by where the value sorts: SQLite orders any number before any text and
# any text before any blob, '' being the least text and x'' the least blob (whatever the
# column's affinity or collation). It reads as `typeof` does (the test holds them equal) at
# a fraction of the cost of the function call: the swaps of the year's book read in 0.88
# of the time with the comparisons.
_SOUND = " AND ".join(
    [f"(e.{c} IS NULL OR e.{c} < '')" for c in validate_value.ENTRY_NUMBERS]
    + [
        f"(e.{c} IS NULL OR (e.{c} >= '' AND e.{c} < x''))"
        for c in _FIELDS
        if c not in validate_value.ENTRY_NUMBERS and c != "id"
    ]
)
_SOUND_AT = f"CASE WHEN {_SOUND} THEN e.at_utc END"
_SELECT = (
    "SELECT "
    + ", ".join(f"{_SOUND_AT} AS at_utc" if c == "at_utc" else f"e.{c}" for c in _COLUMNS)
    + ", v.id AS voided_by "
    "FROM entries e LEFT JOIN entries v ON v.voids = e.id"
)
_TEXT_DEFAULTS = ("note", "reason", "condition", "batch")  # None reads back as ""
_BUILD: dict[str, tuple[type[Entry], tuple[tuple[str, int], ...], tuple[str, ...]]] = {
    kind: (
        cls,
        tuple((name, _COLUMNS.index(name)) for name in entry_columns(cls)),
        tuple(name for name in _TEXT_DEFAULTS if name in entry_columns(cls)),
    )
    for kind, cls in KINDS.items()
}


def _plain(cls: type[Entry]) -> bool:
    """An entry class whose instances are nothing but their fields' values: it can be filled
    in directly (five times faster than its frozen __init__, the same object)."""
    names = {f.name for f in fields(cls)}
    return (
        not hasattr(cls, "__post_init__")
        and not any("__slots__" in vars(k) for k in cls.__mro__ if k is not object)
        and names == set(entry_columns(cls)) | {"at", "logged", "voided_by"}
    )


_PLAIN = {kind for kind, cls in KINDS.items() if _plain(cls)}
_new = object.__new__


_parse_iso = datetime.fromisoformat


def parse_stamp(text: str) -> datetime:
    """parse_utc for the book's own 'YYYY-MM-DDTHH:MM:SSZ' stamps, ~50 times faster."""
    if text.__class__ is str and len(text) == 20 and text[10] == "T" and text[19] == "Z":
        return _parse_iso(text)
    if text is None:  # `_SOUND_AT`: a number of the row is not a number
        raise ValueError("a value in it is not of its kind (stored outside sumpbook)")
    return parse_utc(text)


def _entry(row: Sequence[Any]) -> Entry:
    kind = row[0]
    cls, spec, texts = _BUILD[kind]
    values = {name: row[i] for name, i in spec}
    for name in texts:
        if values[name] is None:
            values[name] = ""
    at, logged = parse_stamp(row[1]), parse_stamp(row[2])
    if kind in _PLAIN:
        entry = _new(cls)
        data = entry.__dict__
        data.update(values)
        data["at"], data["logged"], data["voided_by"] = at, logged, row[-1]
        return entry
    return cls(**values, at=at, logged=logged, voided_by=row[-1])


# What a row that cannot be read raises while it is built (a hand-edited or damaged value).
ROW_ERRORS = (ValueError, TypeError, KeyError, IndexError, OverflowError, AttributeError)
_ID = _COLUMNS.index("id")


def note_unreadable(book: Book, entry_id: Any, what: str) -> None:
    """Remember an entry row that could not be read; readers skip it and the CLI reports it
    (`unreadable_report`). It can still be voided: a void reads only its id and kind."""
    key = validate_value.one_line(str(entry_id), 36)
    book.unreadable.setdefault(key, validate_value.one_line(what, 120))


def unreadable_report(book: Book) -> str | None:
    """One line naming the entries skipped because they could not be read, or None."""
    if not book.unreadable:
        return None
    items = list(book.unreadable.items())
    shown = "; ".join(f"{entry_id[:8]}: {what}" for entry_id, what in items[:5])
    more = f"; and {len(items) - 5} more" if len(items) > 5 else ""
    return (
        f"{len(items)} {'entry' if len(items) == 1 else 'entries'} could not be read and "
        f"{'was' if len(items) == 1 else 'were'} left out ({shown}{more}); "
        + way_out([entry_id for entry_id, _ in items])
    )


def way_out(entry_ids: Sequence[str]) -> str:
    """What to do about entries that cannot be read: a void where one can name them, else a
    backup from before they were written (an id sumpbook does not make)."""
    can = [validate_value.voidable(i) for i in entry_ids]
    if all(can):
        return f"void {'it' if len(entry_ids) == 1 else 'them'} with 'sumpbook log void ID --reason ...'"
    if not any(can):
        return (
            f"{'its id was' if len(entry_ids) == 1 else 'their ids were'} written outside "
            "sumpbook, so no void can name "
            f"{'it' if len(entry_ids) == 1 else 'them'}: restore a backup from before"
        )
    return (
        "void those whose ids sumpbook made with 'sumpbook log void ID --reason ...'; no void "
        "can name the others (ids written outside sumpbook): restore a backup from before"
    )


def _row_problem(exc: BaseException) -> str:
    return f"{type(exc).__name__}: {exc}"


def entries_from_rows(book: Book, rows: Iterable[Sequence[Any]]) -> list[Entry]:
    """Rows of `_SELECT` as entries; one that cannot be read is noted and skipped, never fatal.
    The fast path builds all at once; only a failure walks the rows one by one."""
    rows = rows if isinstance(rows, list) else list(rows)
    try:
        return [_entry(row) for row in rows]
    except ROW_ERRORS:
        out = []
        for row in rows:
            try:
                out.append(_entry(row))
            except ROW_ERRORS as exc:
                if len(row) > len(_COLUMNS) and row[len(_COLUMNS)] is not None:
                    continue  # voided already: nothing left to say about it
                note_unreadable(book, row[_ID] if len(row) > _ID else "?", _row_problem(exc))
        return out


# `read` holds the cyclic collector while it builds its entries (store/base/collector.py):
# every entry read of the one-year book (0.9 M entries, December 2026, a 2-core machine shared
# with other work) took 1.26 and 2.0 times as long without the hold in two runs (speed.py's
# figure 8, which switches it off through this name).
_no_gc_pauses = collector_held


def find_entry(book: Book, entry_id: str) -> Entry:
    """An entry by its id or an unambiguous prefix of at least 6 characters."""
    key = (entry_id or "").strip().lower()
    if len(key) < 6:
        raise BookError("give at least the first 6 characters of the entry id")
    rows = book.conn.execute(
        f"{_SELECT} WHERE e.id >= ? AND e.id < ? LIMIT 2", [key, key + "\uffff"]
    ).fetchall()
    if not rows:
        raise BookError(f"no entry with id {entry_id}")
    if len(rows) > 1:
        raise BookError(f"id {entry_id} is ambiguous: give more characters")
    try:
        return _entry(rows[0])
    except ROW_ERRORS as exc:
        raise BookError(
            f"entry {validate_value.one_line(str(rows[0][_ID]), 36)[:8]} cannot be read "
            f"({validate_value.one_line(_row_problem(exc), 80)}): {way_out([rows[0][_ID]])}"
        ) from exc


_READING_VALUES = (
    f"SELECT {_SOUND_AT}, e.rowid, e.hours, e.dp_bar, e.temp_c, e.indicator, e.flow_lpm, e.id "
    "FROM entries e WHERE e.filter = ? AND e.kind = 'reading'{after} "
    "AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.voids = e.id) ORDER BY e.at_utc, e.rowid"
)
_LIVE_CHANGES = (
    _SELECT.replace(" AS voided_by ", " AS voided_by, e.rowid ")
    + " WHERE e.filter = ? AND e.kind = 'change'{after} AND v.id IS NULL "
    "ORDER BY e.at_utc, e.rowid"
)
_AFTER = " AND e.at_utc >= ? AND (e.at_utc > ? OR e.rowid >= ?)"


def element_items(book: Book, filter: str, change_id: str | None = None) -> list[Any]:
    """A filter position's live element changes (as entries) and readings (as the values
    `elements.split_values` takes) in time order, from one of its changes on (included);
    the whole history when change_id is None. Reading a history this way costs a third of
    building an entry per reading."""
    after, params = "", [filter]
    if change_id is not None:
        row = book.conn.execute(
            "SELECT at_utc, rowid FROM entries WHERE id = ?", [change_id]
        ).fetchone()
        if row is not None:
            after, params = _AFTER, [filter, row[0], row[0], row[1]]
    reading_rows = book.conn.execute(_READING_VALUES.format(after=after), params).fetchall()
    try:
        keyed: list[tuple[str, int, Any]] = [
            (at, rowid, (parse_stamp(at), hours, dp, temp, indicator, flow, entry_id))
            for at, rowid, hours, dp, temp, indicator, flow, entry_id in reading_rows
        ]
    except ROW_ERRORS:
        keyed = []
        for at, rowid, hours, dp, temp, indicator, flow, entry_id in reading_rows:
            try:
                item = (parse_stamp(at), hours, dp, temp, indicator, flow, entry_id)
            except ROW_ERRORS as exc:
                note_unreadable(book, entry_id, _row_problem(exc))
                continue
            keyed.append((at, rowid, item))
    change_rows = book.conn.execute(_LIVE_CHANGES.format(after=after), params).fetchall()
    built = entries_from_rows(book, [row[:-1] for row in change_rows])
    if len(built) == len(change_rows):
        changes = [(row[1], row[-1], e) for row, e in zip(change_rows, built, strict=True)]
    else:
        kept = {e.id for e in built}
        by_id = {e.id: e for e in built}
        changes = [(row[1], row[-1], by_id[row[_ID]]) for row in change_rows if row[_ID] in kept]
    if changes:
        keyed += changes
        keyed.sort(key=lambda item: (item[0], item[1]))
    return [item for _, _, item in keyed]


_READINGS_UNTIL = (
    f"SELECT e.filter, {_SOUND_AT}, e.rowid, e.logged_utc, e.hours, e.dp_bar, e.temp_c, e.indicator, "
    "e.flow_lpm, e.id FROM {source} WHERE e.kind = 'reading'{where} AND e.at_utc < ? "
    "AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.voids = e.id AND v.at_utc < ?) "
    "ORDER BY e.at_utc, e.rowid"
)
# Each position from its own start: the change (time, rowid) its history is read from.
_FROM_START = (
    "(SELECT column1 AS tag, column2 AS at, column3 AS rid FROM (VALUES {values})) AS start "
    "CROSS JOIN entries e ON e.filter = start.tag"
)
_AFTER_START = " AND e.at_utc >= start.at AND (e.at_utc > start.at OR e.rowid >= start.rid)"
_CHANGES_UNTIL = (
    _SELECT.replace(" AS voided_by ", " AS voided_by, e.rowid ")
    + " AND v.at_utc < ? WHERE e.kind = 'change' AND e.filter IS NOT NULL AND e.at_utc < ? "
    "AND v.id IS NULL ORDER BY e.at_utc, e.rowid"
)


def live_changes_until(book: Book, until: datetime) -> list[tuple[str, int, Entry]]:
    """(at_utc, rowid, change) of every position's element changes as the book stood before
    `until` (dated before it, voided only by voids dated before it), in time order."""
    stamp = format_utc(until)
    rows = book.conn.execute(_CHANGES_UNTIL, [stamp, stamp]).fetchall()
    built = entries_from_rows(book, [row[:-1] for row in rows])
    by_id = {e.id: e for e in built}
    return [(row[1], row[-1], by_id[row[_ID]]) for row in rows if row[_ID] in by_id]


def element_items_until(
    book: Book,
    until: datetime,
    starts: dict[str, tuple[str, int]] | None = None,
    changes: Sequence[tuple[str, int, Entry]] | None = None,
) -> dict[str, list[Any]]:
    """`element_items` of every position as the book stood before `until`: entries dated
    before it, voided only by voids dated before it, as `read(filter=tag, until=until,
    as_of=until)` takes them. Keyed by upper-case tag. With `starts` (upper-case tag -> the
    (at_utc, rowid) of one of its live changes): only those positions, each from that change
    on (included), or from its beginning where the start is ("", 0); as `element_items(book,
    tag, change_id)`. One read of the readings (a few for many starts) instead of queries per
    position; `changes` are `live_changes_until`'s, if already read. A row `read` could not
    build an entry from is noted and left out, as `read` does."""
    stamp = format_utc(until)
    queries: list[tuple[str, list[Any]]] = []
    if starts is None:
        where = " AND e.filter IS NOT NULL"
        queries.append((_READINGS_UNTIL.format(source="entries e", where=where), [stamp, stamp]))
    else:
        items = list(starts.items())
        for i in range(0, len(items), 500):
            part = items[i : i + 500]
            source = _FROM_START.format(values=", ".join("(?, ?, ?)" for _ in part))
            sql = _READINGS_UNTIL.format(source=source, where=_AFTER_START)
            params = [value for tag, (at, rowid) in part for value in (tag, at, rowid)]
            queries.append((sql, [*params, stamp, stamp]))
    keyed: dict[str, list[tuple[str, int, Any]]] = {}
    # No held collector here (unlike `read`): the rows become tuples of plain values, which
    # the collector stops tracking once they have lived through one pass, so its passes stay
    # short. The whole plant as of a week back (speed.py's figure 8, one-year book) took
    # 0.96 and 0.94 times as long without the hold in two runs (1.26 in a third, single run).
    for sql, params in queries:
        rows = book.conn.execute(sql, params).fetchall()
        for tag, at, rowid, logged, hours, dp, temp, indicator, flow, entry_id in rows:
            try:
                item = (parse_stamp(at), hours, dp, temp, indicator, flow, entry_id)
                parse_stamp(logged)  # a row `read` cannot build is left out, as there
            except ROW_ERRORS as exc:
                note_unreadable(book, entry_id, _row_problem(exc))
                continue
            key = tag.upper()
            found = keyed.get(key)
            if found is None:
                found = keyed[key] = []
            found.append((at, rowid, item))
    if changes is None:
        changes = live_changes_until(book, until)
    changed: set[str] = set()
    for at, rowid, entry in changes:
        key = entry.filter.upper()  # type: ignore[attr-defined]
        if starts is not None:
            start = starts.get(key)
            if start is None or (at, rowid) < start:
                continue
        keyed.setdefault(key, []).append((at, rowid, entry))
        changed.add(key)
    for key in changed:
        keyed[key].sort(key=lambda item: (item[0], item[1]))
    return {key: [item for _, _, item in items] for key, items in keyed.items()}


class SwapMark(NamedTuple):
    """What a breather's forecast reads of a live swap (store.health.fluidcare.swap_record):
    when it was and the desiccant as found ("" when not said)."""

    at: datetime
    condition: str


_LIVE_SWAPS = (
    f"SELECT e.breather, {_SOUND_AT}, e.logged_utc, e.condition, e.id FROM entries e "
    "WHERE e.breather IS NOT NULL AND e.kind = 'breather'{until} "
    "AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.voids = e.id{void_until}) "
    "ORDER BY e.breather, e.at_utc, e.rowid"
)


def live_swap_marks(
    book: Book, until: datetime | None = None, breathers: Sequence[str] | None = None
) -> dict[str, list[SwapMark]]:
    """Every breather's live swaps in time order, keyed by upper-case tag, as only what a
    forecast needs (no entry built: a third of the time on the year's book); with `until`, as
    the book stood then (swaps before it, voided only by voids dated before it); with
    `breathers`, of those tags only. A voided swap is not read; a live row that cannot be
    read is noted and left out, as `read` does."""
    where = void_until = ""
    params: list[Any] = []  # in the order the SQL reads them: the swap's, then the void's
    void_params: list[Any] = []
    if until is not None:
        stamp = format_utc(until)
        where, params = " AND e.at_utc < ?", [stamp]
        void_until, void_params = " AND v.at_utc < ?", [stamp]
    if breathers is not None:
        where += " AND e.breather IN (SELECT value FROM json_each(?))"
        params.append(json.dumps(list(breathers)))
    sql = _LIVE_SWAPS.format(until=where, void_until=void_until)
    params += void_params
    out: dict[str, list[SwapMark]] = {}
    last, found = None, []
    for tag, at, logged, condition, entry_id in book.conn.execute(sql, params):
        try:  # what `_entry` parses, in its order: the same rows fail with the same message
            when = parse_stamp(at)
            parse_stamp(logged)
        except ROW_ERRORS as exc:
            note_unreadable(book, entry_id, _row_problem(exc))
            continue
        if tag != last:  # the rows come by tag: look its list up once
            last, found = tag, out.setdefault(tag.upper(), [])
        found.append(SwapMark(when, "" if condition is None else condition))
    return out


def _kinds_sql(kinds: Sequence[str]) -> str:
    """`kinds` as SQL literals. They are checked against the schema's own list, so nothing
    typed reaches the SQL text; literals (not parameters) let SQLite use the partial indexes
    on changes and unit events (schema V3), which a bound value cannot prove it may."""
    kinds = [k for k in ENTRY_KINDS if k in kinds]  # an unknown kind matches nothing
    if not kinds:
        return "0"
    if len(kinds) == 1:
        sql = f"e.kind = '{kinds[0]}'"
    else:
        sql = "e.kind IN (" + ", ".join(f"'{k}'" for k in kinds) + ")"
    if "reading" not in kinds:
        sql += " AND e.kind <> 'reading'"  # implies the partial indexes' condition
    return sql


def read(
    book: Book,
    *,
    since: datetime | None = None,
    until: datetime | None = None,
    unit: str | None = None,
    filter: str | None = None,
    breather: str | None = None,
    kinds: Sequence[str] | None = None,
    include_voided: bool = True,
    newest_first: bool = False,
    limit: int | None = None,
    as_of: datetime | None = None,
) -> list[Entry]:
    """Entries in time order (oldest first unless `newest_first`).

    With `as_of`, an entry counts as voided only by a void dated before that time.
    """
    sql, params = _query(
        since, until, unit, filter, breather, kinds, include_voided, newest_first, limit, as_of
    )
    with _no_gc_pauses():
        return entries_from_rows(book, book.conn.execute(sql, params).fetchall())


def _query(
    since: datetime | None,
    until: datetime | None,
    unit: str | None,
    filter: str | None,
    breather: str | None,
    kinds: Sequence[str] | None,
    include_voided: bool,
    newest_first: bool,
    limit: int | None,
    as_of: datetime | None,
) -> tuple[str, list[Any]]:
    where: list[str] = []
    params: list[Any] = []
    join = _SELECT
    if as_of is not None:
        join += " AND v.at_utc < ?"
        params.append(format_utc(as_of))
    for column, value in (("unit", unit), ("filter", filter), ("breather", breather)):
        if value:
            where.append(f"e.{column} = ?")
            params.append(value)
    if since:
        where.append("e.at_utc >= ?")
        params.append(format_utc(since))
    if until:
        where.append("e.at_utc < ?")
        params.append(format_utc(until))
    if kinds:
        where.append(_kinds_sql(kinds))
    if not include_voided:
        where.append("v.id IS NULL")
    sql = join + (" WHERE " + " AND ".join(where) if where else "")
    order = "DESC" if newest_first else "ASC"
    sql += f" ORDER BY e.at_utc {order}, e.rowid {order}"
    if limit:
        sql += " LIMIT ?"
        params.append(limit)
    return sql, params
