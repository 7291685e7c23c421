"""The shift log as CSV, read back: import (all or nothing).

The columns, how each cell is written and how it is read back, are one table in
`store/exchange/csvcolumns.py` (README "CSV shift log"); `store/exchange/csvexport.py` writes them.

Import is all or nothing: the whole file is read and checked first, every problem is
reported with its line number, and one transaction writes it. Nothing is built into SQL:
the cells travel as parameters (store.ledger.journal.insert).
"""

from __future__ import annotations

import codecs
import csv
import io
import uuid
from dataclasses import dataclass, fields, replace
from datetime import UTC, datetime, tzinfo
from typing import Any

from store import record
from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.timeutil import parse_time
from store.db.book import Book
from store.exchange.csvcolumns import (
    STATUS_KIND,
    VALUE_COLUMNS,
    known_headers,
    neutralise,
    restore,
)
from store.ledger.entries import KINDS, Entry
from store.ledger.journal import insert, validate

__all__ = ["Prefs", "import_csv", "neutralise", "parse_csv", "restore"]

MAX_FIELD_CHARS = 10_000
MAX_PROBLEMS_SHOWN = 20


# ---- import -------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ImportResult:
    added: int
    skipped: int  # already in the book (same id)
    status_rows: int = 0  # a shift log's status rows: not entries, passed over


def decode(data: bytes) -> str:
    """CSV bytes -> text: UTF-8 (with or without BOM), or UTF-16 with its BOM."""
    for bom, codec in (
        (codecs.BOM_UTF8, "utf-8"),
        (codecs.BOM_UTF16_LE, "utf-16-le"),
        (codecs.BOM_UTF16_BE, "utf-16-be"),
    ):
        if data.startswith(bom):
            data, encoding = data[len(bom) :], codec
            break
    else:
        encoding = "utf-8"
    if encoding == "utf-8" and b"\x00" in data:
        line = data.count(b"\n", 0, data.index(b"\x00")) + 1
        raise BookError(f"line {line}: the file is not CSV text (it holds NUL bytes)")
    try:
        text = data.decode(encoding)
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1 if encoding == "utf-8" else 1
        raise BookError(
            f"line {line}: the file is not {encoding.upper()} text (byte {exc.start}): "
            "save it as 'CSV UTF-8' and try again"
        ) from exc
    if "\x00" in text:
        line = text.count("\n", 0, text.index("\x00")) + 1
        raise BookError(f"line {line}: the file is not CSV text (it holds NUL characters)")
    return text


def _entry_id(text: str) -> str:
    """An entry id as the book writes them: a UUID in its 36-character form."""
    clean = text.strip().lower()
    try:
        if len(clean) == 36 and str(uuid.UUID(clean)) == clean:
            return clean
    except ValueError:
        pass
    raise BookError(f"id '{text[:40]}' is not an entry id (a UUID such as sumpbook writes)")


def entry_from_row(row: dict[str, str], local: tzinfo, now: datetime | None = None) -> Entry:
    """One row as an entry; its time within a day ahead of `now`, the book's clock (the
    computer's when not given), as every door measures it."""
    kind = row.get("kind", "").strip().lower()
    if kind not in KINDS:
        raise BookError(f"kind '{kind[:20]}' is unknown: use {', '.join(KINDS)}")
    cls = KINDS[kind]
    time_text = row.get("time", "").strip()
    if not time_text:
        raise BookError("time is empty")
    values: dict[str, Any] = {
        "at": parse_time(time_text, local, now=now),
        "by": row.get("by", "").strip(),
        "note": row.get("note", ""),
    }
    if row.get("id", "").strip():
        values["id"] = _entry_id(row["id"])
    target = row.get("target", "").strip()
    table = cls.target_table
    if table is not None:
        column = {"filters": "filter", "breathers": "breather", "units": "unit"}[table]
        if not target and kind != "note":
            raise BookError(f"a {kind} needs a target ({column} tag)")
        values[column] = target or row.get("unit", "").strip() or None
    names = {f.name for f in fields(cls)}
    for column in VALUE_COLUMNS:  # store/exchange/csvcolumns.py: how each cell is read back
        if column.field in names and column.field not in ("unit", "by", "note"):
            value = column.read(row)
            if value is not None:
                values[column.field] = value
    if "volume_l" in names and values.get("volume_l") is None:
        raise BookError("a top-up needs a volume")
    if kind == "void" and not values.get("voids"):
        raise BookError("a void needs the id of the entry it voids (column voids)")
    try:
        return cls(**values)
    except TypeError as exc:
        raise BookError(f"incomplete {kind} row ({exc})") from exc


def one_line(text: str, limit: int = 200) -> str:
    """A message quoting cell text stays one short printable line."""
    flat = "".join(ch if ch.isprintable() else " " for ch in text)
    return flat if len(flat) <= limit else flat[: limit - 1] + "…"


def known_columns() -> set[str]:
    """Every column import understands (store/exchange/csvcolumns.py)."""
    return known_headers()


def _header(cells: list[str]) -> list[str]:
    header = [cell.strip().lower() for cell in cells]
    named = [h for h in header if h]
    repeated = sorted({h for h in named if named.count(h) > 1})
    if repeated:
        raise BookError(f"line 1: the header repeats the column(s) {one_line(', '.join(repeated))}")
    unknown = [h for h in named if h not in known_columns()]
    if unknown:
        shown = one_line(", ".join(f"'{h[:30]}'" for h in unknown[:5]))
        raise BookError(
            f"line 1: unknown column(s) {shown}: use the columns 'sumpbook export' writes"
        )
    missing = [c for c in ("time", "kind", "by") if c not in header]
    if missing:
        raise BookError(f"line 1: the header lacks the column(s) {', '.join(missing)}")
    return header


def parse_csv(
    text: str, local: tzinfo, now: datetime | None = None
) -> tuple[list[tuple[int, Entry]], list[tuple[int, str]]]:
    """Rows -> entries with their line numbers, and every problem found (line, message)."""
    entries, problems, _ = read_rows(text, local, now)
    return entries, problems


def read_rows(
    text: str, local: tzinfo, now: datetime | None = None
) -> tuple[list[tuple[int, Entry]], list[tuple[int, str]], int]:
    """`parse_csv`, and how many status rows (csvcolumns.STATUS_KIND) were passed over."""
    old_limit = csv.field_size_limit(MAX_FIELD_CHARS)
    try:
        return _parse(csv.reader(io.StringIO(text, newline=""), strict=True), local, now)
    finally:
        csv.field_size_limit(old_limit)


def _parse(
    reader: Any, local: tzinfo, now: datetime | None
) -> tuple[list[tuple[int, Entry]], list[tuple[int, str]], int]:
    entries: list[tuple[int, Entry]] = []
    problems: list[tuple[int, str]] = []
    seen: dict[str, int] = {}
    status_rows = 0

    def problem(text: str) -> None:
        problems.append((reader.line_num, f"line {reader.line_num}: {one_line(text)}"))

    try:
        first = next(reader, None)
        if first is None or not any(cell.strip() for cell in first):
            raise BookError("the file is empty (or its first line is blank)")
        header = _header(first)
        nameless = [i for i, h in enumerate(header) if not h]
        for cells in reader:
            if not any(cell.strip() for cell in cells):
                continue
            if any(cell.strip() for cell in cells[len(header) :]):
                problem("more cells than the header has columns")
                continue
            if any(i < len(cells) and cells[i].strip() for i in nameless):
                problem("a cell stands under a column with no name")
                continue
            row = {
                h: restore(cells[i]) if i < len(cells) else "" for i, h in enumerate(header) if h
            }
            if row.get("kind", "").strip().lower() == STATUS_KIND:
                status_rows += 1  # the handover after the entries: written, never read back
                continue
            try:
                entry = entry_from_row(row, local, now)
            except (ValueError, OverflowError) as exc:  # BookError is a ValueError
                problem(str(exc))
                continue
            if entry.id in seen:
                problem(f"id {entry.id[:36]} repeats line {seen[entry.id]}")
                continue
            if entry.id:
                seen[entry.id] = reader.line_num
            entries.append((reader.line_num, entry))
    except csv.Error as exc:
        message = str(exc)
        if "field larger than field limit" in message:
            message = f"a cell is longer than {MAX_FIELD_CHARS} characters"
        elif "unexpected end of data" in message:
            message = "the file ends inside a quoted cell (a closing '\"' is missing)"
        elif "expected after" in message:
            message = f"a quoted cell goes on after its closing quote ({message})"
        problem(message)
    return entries, problems, status_rows


def import_csv(book: Book, data: bytes, local: tzinfo) -> ImportResult:
    """Read entries from CSV bytes. One bad row rejects the file: nothing is written, and
    every problem (reading the file or checking it against the book) is named by line."""
    now = book.now()  # the times are judged by the book's clock, as every door judges them
    entries, problems, status_rows = read_rows(decode(data), local, now)
    added = skipped = 0
    written: list[Entry] = []
    record.preload()
    try:
        with book.atomic():
            for line, entry in entries:
                if not entry.id:
                    entry = replace(entry, id=content_id(entry))
                if _exists(book, entry.id):
                    skipped += 1
                    continue
                try:
                    entry = validate(book, entry, now)
                    entry = replace(entry, logged=now)
                    insert(book, entry)
                    written.append(entry)
                    added += 1
                except (ValueError, OverflowError) as exc:  # BookError is a ValueError
                    problems.append((line, f"line {line}: {one_line(str(exc))}"))
            if problems:
                raise _Rejected
            record.after_write(book, written)  # derived rows, once per filter touched
    except _Rejected:
        pass
    if problems:
        lines = [text for _, text in sorted(problems, key=lambda p: p[0])]
        extra = len(lines) - MAX_PROBLEMS_SHOWN
        shown = lines[:MAX_PROBLEMS_SHOWN] + ([f"… and {extra} more"] if extra > 0 else [])
        raise BookError("nothing imported; " + "; ".join(shown))
    return ImportResult(added, skipped, status_rows)


# A row with no id gets one derived from what it says (README "Your data"): the same row
# imported again finds its entry and adds nothing. Two rows alike in every cell are one entry.
CONTENT_NAMESPACE = uuid.UUID("5d0e7a52-3c1b-4f0e-9a57-2f6b1c0d4e20")


def content_id(entry: Entry) -> str:
    """A UUID (version 5) of the entry's kind and values as read from the row: its time in
    UTC, who, the target and every value in canonical units, the note."""
    parts = [entry.kind]
    for f in fields(entry):
        if f.name in ("id", "logged", "voided_by"):
            continue
        value = getattr(entry, f.name)
        if isinstance(value, datetime):
            value = value.astimezone(UTC).isoformat()
        parts.append(f"{f.name}={value!r}")
    return str(uuid.uuid5(CONTENT_NAMESPACE, "\x1f".join(parts)))


class _Rejected(Exception):
    pass


def _exists(book: Book, entry_id: str) -> bool:
    return (
        book.conn.execute("SELECT 1 FROM entries WHERE id = ?", [entry_id]).fetchone() is not None
    )
