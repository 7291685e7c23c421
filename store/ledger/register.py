"""The register: units, fluids, filter positions, breathers, technicians, shifts.

Register rows may change (limits get adjusted), but every change is recorded in
`register_log` (who, when, old -> new), because limits drive the predictions: a change of a
field by the file itself (schema 5 triggers, whoever made it), an added record and the shift
pattern here. The history refuses to be edited or deleted.
"""

from __future__ import annotations

import functools
import sqlite3
from collections.abc import Iterable, Sequence
from dataclasses import asdict, fields
from datetime import datetime
from typing import Any, TypeVar

from store.base import validate
from store.base.errors import BookError
from store.base.records import filled_record, frozen_record
from store.base.timeutil import format_utc, parse_utc
from store.base.validate import FILTER_KINDS
from store.db.book import Book
from store.physics.cleanliness import parse_code
from store.physics.fluid import iso_vg_limits

TAG_RE = validate.TAG_RE


@frozen_record(kw_only=True)
class Technician:
    tag: str
    name: str = ""
    active: bool = True


@frozen_record(kw_only=True)
class Fluid:
    tag: str
    name: str = ""
    iso_vg: int | None = None
    nu40_cst: float | None = None
    nu100_cst: float | None = None
    vi: float | None = None
    density_kg_l: float | None = None


@frozen_record(kw_only=True)
class Unit:
    tag: str
    name: str = ""
    area: str = ""
    reservoir_l: float | None = None
    fluid: str | None = None
    normal_temp_c: float = 50.0
    max_temp_c: float = 60.0  # common practice, no source: bulk limit near 60 °C
    coldest_start_c: float = 15.0
    hour_meter: bool = False
    target_code: str | None = None


@frozen_record(kw_only=True)
class FilterPosition:
    tag: str
    unit: str
    kind: str
    element: str = ""
    rating_um: float | None = None
    rating_basis: str = "absolute"
    beta_ratio: float | None = None
    bypass_bar: float | None = None
    limit_bar: float | None = None
    clean_bar: float | None = None
    rated_flow_lpm: float | None = None
    normal_flow_lpm: float | None = None
    gauge: bool = True
    reading_interval_h: float = 168.0


# The sizing rule of a filter maker's handbook (The Handbook of Hydraulic Filtration, "Filter
# housing selection", p. 29): a clean element's ΔP should be at most 1/2 of the bypass setting,
# better 1/3. Without a bypass the change limit stands in for it.
CLEAN_SHARE_MAX = 0.5


def sizing_doubt(position: FilterPosition) -> str | None:
    """Why the settings may be mistyped though they can be true (a clean ΔP close to the
    bypass or limit: an element that starts near its end), or None. Not a refusal."""
    top, what = (
        (position.bypass_bar, "bypass setting")
        if position.bypass_bar
        else (position.limit_bar, "change limit")
    )
    if position.clean_bar is None or not top or position.clean_bar <= CLEAN_SHARE_MAX * top:
        return None
    return (
        f"{position.tag}: the clean-element ΔP ({position.clean_bar:g} bar) is more than half the "
        f"{what} ({top:g} bar), so a new element would start close to its end. Check the "
        "values against the filter maker's data: a clean element usually reads at most half, "
        "better a third, of the bypass setting."
    )


@frozen_record(kw_only=True)
class Breather:
    tag: str
    unit: str
    kind: str = "desiccant"
    rating_um: float | None = None
    swap_interval_d: float = 90.0


@frozen_record(kw_only=True)
class Shift:
    name: str
    starts: str  # local wall-clock "HH:MM"
    position: int


R = TypeVar("R")

TABLES: dict[type, str] = {
    Technician: "technicians",
    Fluid: "fluids",
    Unit: "units",
    FilterPosition: "filters",
    Breather: "breathers",
}
WHAT = {
    "technicians": "technician",
    "fluids": "fluid",
    "units": "unit",
    "filters": "filter",
    "breathers": "breather",
}
BOOL_FIELDS = {"active", "hour_meter", "gauge"}


def normalise_tag(tag: str, what: str = "tag") -> str:
    return validate.tag(tag, what)


@functools.cache
def _names(cls: type) -> frozenset[str]:
    return frozenset(f.name for f in fields(cls))


def _from_row(cls: type[R], row: dict[str, Any]) -> R:
    names = _names(cls)  # (fields() of each row took a third of reading a big register)
    values = {k: (bool(v) if k in BOOL_FIELDS else v) for k, v in row.items() if k in names}
    return cls(**values)


def _rows(book: Book, sql: str, params: list[Any]) -> list[dict[str, Any]]:
    cursor = book.conn.execute(sql, params)
    names = [d[0] for d in cursor.description]
    return [dict(zip(names, row, strict=True)) for row in cursor]


def tags(book: Book, table: str) -> list[str]:
    return [r["tag"] for r in _rows(book, f"SELECT tag FROM {table} ORDER BY tag", [])]


def unknown_tag(book: Book, table: str, tag: str) -> BookError:
    """An error naming the closest known tags."""
    known = tags(book, table)
    import difflib  # only a tag not found asks for its neighbours

    close = difflib.get_close_matches(tag.upper(), known, n=3, cutoff=0.5)
    hint = f": did you mean {' or '.join(close)}?" if close else ""
    if not known:
        hint = f": the book has no {table} yet"
    return BookError(f"unknown {WHAT[table]} '{tag}'{hint}")


def get(book: Book, cls: type[R], tag: str) -> R:
    table = TABLES[cls]
    rows = _rows(book, f"SELECT * FROM {table} WHERE tag = ?", [tag.strip()])
    if not rows:
        raise unknown_tag(book, table, tag)
    return _from_row(cls, rows[0])


def find(book: Book, cls: type[R], tag: str) -> R | None:
    try:
        return get(book, cls, tag)
    except BookError:
        return None


def list_all(book: Book, cls: type[R], unit: str | None = None) -> list[R]:
    """Every record of a register (of one unit's positions or breathers), by tag: each filled
    in from its row tuple, as its __init__ would set it (no dict per row, no keyword call: half
    the time for the year's book's 800 positions, read on every watch list). A record class
    with more than plain fields, or a table without one of its fields, goes through __init__."""
    table = TABLES[cls]
    sql, params = f"SELECT * FROM {table} ORDER BY tag", []
    if unit is not None and cls in (FilterPosition, Breather):
        sql, params = f"SELECT * FROM {table} WHERE unit = ? ORDER BY tag", [unit]
    cursor = book.conn.execute(sql, params)
    return records_from(cls, [d[0] for d in cursor.description], cursor)


def records_from(cls: type[R], columns: Sequence[str], rows: Iterable[tuple]) -> list[R]:
    """Records of `cls` from rows of its table as `SELECT *` gives them (`columns`, their
    names): what `list_all` makes of them, for a reader that has the rows already."""
    index = {name: i for i, name in enumerate(columns)}
    names = [f.name for f in fields(cls)]  # in the order __init__ sets them
    cols = [(index[n], n, n in BOOL_FIELDS) for n in names if n in index]
    if hasattr(cls, "__post_init__") or "__slots__" in vars(cls) or len(cols) != len(names):
        return [cls(**{n: (bool(r[i]) if b else r[i]) for i, n, b in cols}) for r in rows]
    return [
        filled_record(cls, {n: (bool(row[i]) if b else row[i]) for i, n, b in cols}) for row in rows
    ]


_TEXT_FIELDS = ("name", "area", "element")


def _values(record: Any) -> dict[str, Any]:
    """The record's own values checked one by one: numbers finite and in range, text without
    control characters and within its length, yes/no fields as booleans."""
    changes: dict[str, Any] = {}
    for f in fields(record):
        value = getattr(record, f.name)
        if f.name in validate.RANGES:
            if value is None and "None" not in str(f.type):
                raise BookError(f"{validate.RANGES[f.name].label} must be given")
            changes[f.name] = validate.number(f.name, value)
        elif f.name in _TEXT_FIELDS:
            changes[f.name] = validate.text(f.name, value)
        elif f.name in BOOL_FIELDS:
            if not isinstance(value, bool | int) or value not in (0, 1):
                raise BookError(f"{f.name} must be yes or no")
            changes[f.name] = bool(value)
    return changes


def _check(book: Book, record: Any) -> Any:
    """Normalise tags and refuse settings that cannot be right."""
    changes: dict[str, Any] = {"tag": normalise_tag(record.tag, WHAT[TABLES[type(record)]])}
    changes.update(_values(record))
    for ref, cls in (("unit", Unit), ("fluid", Fluid)):
        value = getattr(record, ref, None)
        if value:
            changes[ref] = get(book, cls, value).tag
    if isinstance(record, FilterPosition):
        if record.kind not in FILTER_KINDS:
            raise BookError(f"unknown filter kind '{record.kind}': use {', '.join(FILTER_KINDS)}")
        if record.rating_basis not in ("absolute", "nominal"):
            raise BookError("the rating basis is absolute or nominal")
        if record.limit_bar and record.bypass_bar and record.limit_bar >= record.bypass_bar:
            raise BookError(
                f"the change limit ({record.limit_bar:g} bar) must be below the bypass setting "
                f"({record.bypass_bar:g} bar): the element must be changed before the bypass opens"
            )
        if (
            record.clean_bar is not None
            and record.limit_bar
            and record.clean_bar >= record.limit_bar
        ):
            raise BookError(
                f"the clean-element ΔP ({record.clean_bar:g} bar) must be below the change "
                f"limit ({record.limit_bar:g} bar)"
            )
        if (
            record.clean_bar is not None
            and record.bypass_bar
            and record.clean_bar >= record.bypass_bar
        ):
            raise BookError(
                f"the clean-element ΔP ({record.clean_bar:g} bar) must be below the bypass "
                f"setting ({record.bypass_bar:g} bar)"
            )
    if isinstance(record, Breather) and record.kind not in ("desiccant", "plain"):
        raise BookError("a breather is desiccant or plain")
    if isinstance(record, Unit):
        if record.target_code:
            validate.text("target code", record.target_code, 20)
            changes["target_code"] = str(parse_code(record.target_code))
        if not -40 <= record.coldest_start_c <= record.normal_temp_c <= record.max_temp_c <= 150:
            raise BookError(
                "temperatures must run coldest start ≤ normal ≤ limit, within -40…150 °C"
            )
    if isinstance(record, Fluid):
        if record.iso_vg is not None:
            iso_vg_limits(record.iso_vg)
        if record.nu40_cst and record.nu100_cst and record.nu100_cst >= record.nu40_cst:
            raise BookError("ν100 must be below ν40")
    return type(record)(**{**asdict(record), **changes})


def _log_change(book: Book, table: str, tag: str, field: str, old: Any, new: Any, by: str) -> None:
    import uuid  # a change to the register: kept off the lean path, as in record._append

    book.conn.execute(
        "INSERT INTO register_log(id, at_utc, by, tbl, tag, field, old, new) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
        [
            str(uuid.uuid4()),
            format_utc(book.clock()),
            by,
            table,
            tag,
            field,
            None if old is None else str(old),
            None if new is None else str(new),
        ],
    )


def add(book: Book, record: R, by: str = "") -> R:
    """Add a new register row; refuses a tag that exists already (any case)."""
    record = _check(book, record)
    table = TABLES[type(record)]
    row = asdict(record)  # type: ignore[call-overload]
    with book.atomic():
        if _rows(book, f"SELECT 1 FROM {table} WHERE tag = ?", [row["tag"]]):
            raise BookError(f"{WHAT[table]} '{row['tag']}' exists already")
        if table in ("filters", "breathers"):
            other = "breathers" if table == "filters" else "filters"
            if _rows(book, f"SELECT 1 FROM {other} WHERE tag = ?", [row["tag"]]):
                raise BookError(f"tag '{row['tag']}' is used by a {WHAT[other]} already")
        columns = ", ".join(row)
        marks = ", ".join("?" for _ in row)
        try:
            book.conn.execute(
                f"INSERT INTO {table} ({columns}) VALUES ({marks})", list(row.values())
            )
        except sqlite3.IntegrityError as exc:
            raise BookError(f"cannot add {WHAT[table]} '{row['tag']}': {exc}") from exc
        _log_change(book, table, row["tag"], "*", None, "added", by)
    return record


def update(book: Book, cls: type[R], tag: str, changes: dict[str, Any], by: str = "") -> R:
    """Change register fields (not the tag); each changed field is logged old -> new."""
    current = get(book, cls, tag)
    allowed = {f.name for f in fields(cls)} - {"tag"}  # type: ignore[arg-type]
    bad = set(changes) - allowed
    if bad:
        raise BookError(f"cannot change {', '.join(sorted(bad))}")
    updated = _check(book, type(current)(**{**asdict(current), **changes}))  # type: ignore[call-overload]
    table = TABLES[cls]
    moved = [n for n in changes if getattr(current, n) != getattr(updated, n)]
    with book.atomic():
        if moved:  # one statement: the schema checks the fields together (limit < bypass)
            # the file logs each moved field itself (schema 5, `{table}_history`), as by and
            # at the time this row of `register_editor` says
            book.conn.execute(
                "INSERT OR REPLACE INTO register_editor (one, by, at_utc) VALUES (1, ?, ?)",
                [by, format_utc(book.clock())],
            )
            try:
                book.conn.execute(
                    f"UPDATE {table} SET {', '.join(f'{n} = ?' for n in moved)} WHERE tag = ?",
                    [getattr(updated, n) for n in moved] + [current.tag],
                )
            except sqlite3.IntegrityError as exc:  # the schema's last line held
                raise BookError(f"cannot change {current.tag}: {exc}") from exc
            book.conn.execute("DELETE FROM register_editor")
    return updated


def register_history(book: Book, tag: str) -> list[dict[str, Any]]:
    return _rows(book, "SELECT * FROM register_log WHERE tag = ? ORDER BY at_utc", [tag])


@frozen_record
class RegisterChange:
    """One recorded change of the register: who, when, which field, old -> new (as stored,
    canonical units). `field` is '*' for a record added; the shift pattern has tag PATTERN."""

    at: datetime  # UTC
    by: str
    what: str  # technician, fluid, unit, filter, breather or shifts
    tag: str
    field: str
    old: str | None
    new: str | None


def history(
    book: Book, tag: str | None = None, what: str | None = None, limit: int | None = None
) -> list[RegisterChange]:
    """The register's changes, oldest first: of one record (`tag`, any case; `what` narrows
    it to one table: 'filter', 'unit', ...), or of the whole register; `limit` keeps the
    newest that many."""
    where, params = [], []
    if what is not None:
        tables = [t for t, word in WHAT.items() if word == what] or [what]
        where.append("tbl = ?")
        params.append(tables[0])
    if tag is not None:
        where.append("tag = ?")
        params.append(tag.strip())
    sql = "SELECT at_utc, by, tbl, tag, field, old, new FROM register_log"
    if where:
        sql += " WHERE " + " AND ".join(where)
    sql += " ORDER BY at_utc DESC, rowid DESC"
    if limit is not None:
        sql += " LIMIT ?"
        params.append(limit)
    rows = _rows(book, sql, params)
    return [
        RegisterChange(
            at=parse_utc(r["at_utc"]),
            by=r["by"],
            what=WHAT.get(r["tbl"], r["tbl"]),
            tag=r["tag"],
            field=r["field"],
            old=r["old"],
            new=r["new"],
        )
        for r in reversed(rows)
    ]


def set_shifts(book: Book, shifts: list[tuple[str, str]], by: str = "") -> list[Shift]:
    """Replace the shift pattern: [(name, 'HH:MM'), ...] in the order they run."""
    if not shifts:
        raise BookError("a shift pattern needs at least one shift")
    result = []
    seen = set()
    for i, (name, starts) in enumerate(shifts):
        name, starts = validate.shift(name, starts)
        if name.lower() in seen or starts in {s.starts for s in result}:
            raise BookError(f"shift '{name}' repeats a name or a start time")
        seen.add(name.lower())
        result.append(Shift(name=name, starts=starts.strip(), position=i))
    old = ", ".join(f"{s.name} {s.starts}" for s in list_shifts(book))
    with book.atomic():
        book.conn.execute("DELETE FROM shifts")
        for s in result:
            book.conn.execute(
                "INSERT INTO shifts(name, starts, position) VALUES (?, ?, ?)",
                [s.name, s.starts, s.position],
            )
        _log_change(
            book,
            "shifts",
            "PATTERN",
            "shifts",
            old or None,
            ", ".join(f"{s.name} {s.starts}" for s in result),
            by,
        )
    return result


def list_shifts(book: Book) -> list[Shift]:
    rows = _rows(book, "SELECT name, starts, position FROM shifts ORDER BY starts", [])
    return [Shift(**r) for r in rows]


def parse_field(cls: type, name: str, text: str) -> Any:
    """A register field typed as text on the command line -> its stored value."""
    kinds = {f.name: f.type for f in fields(cls)}
    kind = str(kinds[name])
    if text.strip().lower() in ("", "none", "-") and "None" in kind:
        return None
    try:
        if name in BOOL_FIELDS:
            if text.strip().lower() not in ("yes", "no", "true", "false", "1", "0"):
                raise ValueError
            return text.strip().lower() in ("yes", "true", "1")
        if name in validate.RANGES:
            return validate.parse_number(name, text)
        if kind.startswith("float"):
            return float(text)
        if kind.startswith("int"):
            return int(text)
    except ValueError as exc:
        if isinstance(exc, BookError):
            raise
        shown = validate.one_line(text, 30)
        raise BookError(f"{name} '{shown}' is not a {kind.split(' ')[0]}") from exc
    return text
