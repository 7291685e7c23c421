"""Writing and reading entries: validation, append-only writes, voids."""

from __future__ import annotations

import math
import sqlite3
import uuid
from collections.abc import Callable, Iterable, Sequence
from dataclasses import replace
from datetime import datetime
from typing import Any

from .book import Book
from .entries import (
    KINDS,
    BreatherSwap,
    ElementChange,
    Entry,
    Reading,
    Sample,
    TopUp,
    Void,
    entry_columns,
    from_row,
)
from .errors import BookError
from .register import (
    Breather,
    FilterPosition,
    Fluid,
    Technician,
    Unit,
    get,
)
from .schema import INDICATOR_STATES
from .timeutil import MAX_AHEAD, format_utc, utc_now

MAX_DP_BAR = 100.0  # a filter ΔP above this is a typo, not a reading
TEMP_RANGE_C = (-40.0, 150.0)
MAX_NOTE_CHARS = 2000
CHANGE_REASONS = ("limit", "indicator", "interval", "bypass", "damage", "other")
BREATHER_REASONS = ("interval", "spent", "damage", "other")


def _refresh_status(book: Book, entry: Entry) -> None:
    from .statuscache import after_entry  # imported late: it pulls in the fitting maths

    after_entry(book, entry)


def load_hooks() -> None:
    """Import what the hooks need before taking the write lock (numpy and scipy are slow
    to import, and other writers wait while the lock is held)."""
    from . import statuscache  # noqa: F401


# Called inside the write transaction after each entry lands: keeps the status cache fresh.
AFTER_WRITE: list[Callable[[Book, Entry], None]] = [_refresh_status]


def _finite(name: str, value: float | None, low: float, high: float, unit: str) -> None:
    if value is None:
        return
    if not isinstance(value, int | float) or not math.isfinite(value):
        raise BookError(f"{name} must be a number")
    if not low <= value <= high:
        raise BookError(f"{name} {value:g} {unit} is outside {low:g}…{high:g} {unit}")


def _text(name: str, value: str, limit: int = MAX_NOTE_CHARS) -> str:
    value = (value or "").strip()
    if len(value) > limit:
        raise BookError(f"{name} is longer than {limit} characters")
    if any(ord(ch) < 32 and ch not in "\n\t" for ch in value):
        raise BookError(f"{name} holds control characters")
    return value


def validate(book: Book, entry: Entry, now: datetime | None = None) -> Entry:
    """Return the entry completed (tags normalised, unit filled) or raise BookError."""
    now = now or book.now()
    changes: dict[str, Any] = {}
    if not entry.by:
        raise BookError("who made this entry? give the technician's initials")
    changes["by"] = get(book, Technician, entry.by).tag
    at = entry.at or now
    if at > now + MAX_AHEAD:
        raise BookError("the time is more than a day ahead of this computer's clock")
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

    for name in ("dp_bar", "temp_c", "flow_lpm", "hours"):
        if hasattr(entry, name):
            _finite(
                name.split("_")[0] if name != "flow_lpm" else "flow",
                getattr(entry, name),
                *{
                    "dp_bar": (0.0, MAX_DP_BAR, "bar"),
                    "temp_c": (*TEMP_RANGE_C, "°C"),
                    "flow_lpm": (0.001, 100_000.0, "L/min"),
                    "hours": (0.0, 10_000_000.0, "h"),
                }[name],
            )
    if isinstance(entry, Reading):
        if entry.dp_bar is None and entry.indicator is None:
            raise BookError("a reading needs a ΔP value or an indicator state")
        if entry.indicator is not None and entry.indicator not in INDICATOR_STATES:
            raise BookError(f"indicator must be one of {', '.join(INDICATOR_STATES)}")
    elif isinstance(entry, ElementChange):
        if entry.reason not in CHANGE_REASONS:
            raise BookError(f"change reason must be one of {', '.join(CHANGE_REASONS)}")
        changes["condition"] = _text("condition", entry.condition, 200)
        changes["batch"] = _text("batch", entry.batch, 60)
    elif isinstance(entry, BreatherSwap):
        if entry.reason not in BREATHER_REASONS:
            raise BookError(f"swap reason must be one of {', '.join(BREATHER_REASONS)}")
        changes["condition"] = _text("condition", entry.condition, 200)
    elif isinstance(entry, TopUp):
        _finite("volume", entry.volume_l, 0.01, 100_000.0, "L")
        _finite("filtered rating", entry.filtered_um, 0.1, 1000.0, "µm")
        fluid = entry.fluid or get(book, Unit, changes["unit"]).fluid
        changes["fluid"] = get(book, Fluid, fluid).tag if fluid else None
    elif isinstance(entry, Sample):
        changes.update(_sample_fields(entry))
    elif isinstance(entry, Void):
        if not changes["note"]:
            raise BookError("say why the entry is voided")
        changes["voids"] = _voidable(book, entry.voids)
    return replace(entry, **changes)


def _sample_fields(entry: Sample) -> dict[str, Any]:
    from .cleanliness import code_from_counts, parse_code

    for name in ("c4_per_ml", "c6_per_ml", "c14_per_ml"):
        _finite(name.replace("_per_ml", " count"), getattr(entry, name), 0.0, 1e9, "/mL")
    _finite("water", entry.water_ppm, 0.0, 1_000_000.0, "ppm")
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
    target = find_entry(book, entry_id)
    if target.kind == "void":
        raise BookError("a void cannot be voided: log the entry again instead")
    if target.voided:
        raise BookError(f"entry {target.id[:8]} is voided already")
    return target.id


def _row(entry: Entry) -> dict[str, Any]:
    row = {name: getattr(entry, name) for name in entry_columns(type(entry))}
    row["kind"] = entry.kind
    row["at_utc"] = format_utc(entry.at)  # type: ignore[arg-type]
    row["logged_utc"] = format_utc(entry.logged or utc_now())
    return row


def insert(book: Book, entry: Entry, hooks: bool = True) -> None:
    """Write one validated entry inside the caller's transaction.

    With hooks=False the caller runs `after_write` once for the whole batch.
    """
    row = _row(entry)
    columns = ", ".join(row)
    marks = ", ".join("?" for _ in row)
    try:
        book.conn.execute(f"INSERT INTO entries ({columns}) VALUES ({marks})", list(row.values()))
    except sqlite3.IntegrityError as exc:
        raise BookError(f"the book refused the entry: {exc}") from exc
    if hooks:
        after_write(book, [entry])


def after_write(book: Book, entries: Sequence[Entry]) -> None:
    """Run the AFTER_WRITE hooks once per filter, breather or unit a batch touched."""
    last: dict[str, Entry] = {}
    for entry in entries:
        key = getattr(entry, "voids", None) or entry.target or entry.unit or ""
        last[key] = entry
    for entry in last.values():
        for hook in AFTER_WRITE:
            hook(book, entry)


def count(book: Book) -> int:
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def log(book: Book, entry: Entry) -> Entry:
    """Validate and append one entry; returns it with id and times filled in."""
    return log_many(book, [entry])[0]


def log_many(book: Book, entries: Iterable[Entry]) -> list[Entry]:
    """All or nothing: every entry is validated and written in one transaction."""
    now = book.now()
    done = []
    load_hooks()
    with book.atomic():
        for entry in entries:
            entry = validate(book, entry, now)
            entry = replace(entry, id=entry.id or str(uuid.uuid4()), logged=entry.logged or now)
            insert(book, entry, hooks=False)
            done.append(entry)
        after_write(book, done)
    return done


_SELECT = "SELECT e.*, v.id AS voided_by FROM entries e LEFT JOIN entries v ON v.voids = e.id"


def find_entry(book: Book, entry_id: str) -> Entry:
    """An entry by its id or an unambiguous prefix of at least 6 characters."""
    key = (entry_id or "").strip().lower()
    if len(key) < 6:
        raise BookError("give at least the first 6 characters of the entry id")
    rows = list(
        book.db.query(f"{_SELECT} WHERE e.id >= ? AND e.id < ? LIMIT 2", [key, key + "\uffff"])
    )
    if not rows:
        raise BookError(f"no entry with id {entry_id}")
    if len(rows) > 1:
        raise BookError(f"id {entry_id} is ambiguous: give more characters")
    return from_row(rows[0])


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
        where.append(f"e.kind IN ({', '.join('?' for _ in kinds)})")
        params.extend(kinds)
    if not include_voided:
        where.append("v.id IS NULL")
    sql = join + (" WHERE " + " AND ".join(where) if where else "")
    order = "DESC" if newest_first else "ASC"
    sql += f" ORDER BY e.at_utc {order}, e.rowid {order}"
    if limit:
        sql += " LIMIT ?"
        params.append(limit)
    return [from_row(row) for row in book.db.query(sql, params)]
