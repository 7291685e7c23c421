"""The shift log as CSV: export, and import back (all or nothing).

Columns (in this order; units in the header names, times ISO 8601 with offset):
see Prefs.columns and README "CSV shift log". Every cell that is not a number we wrote
ourselves and that a spreadsheet would run as a formula (leading =, +, -, @, tab, CR) is
written with a leading apostrophe; import takes it off again.

Import is all or nothing: the whole file is read and checked first, every problem is
reported with its line number, and one transaction writes it. Nothing is built into SQL:
the cells travel as parameters (journal.insert).
"""

from __future__ import annotations

import codecs
import csv
import io
import uuid
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, fields, replace
from datetime import tzinfo
from typing import IO, Any

from .book import Book
from .conditions import FilterContext, contexts, normalise
from .entries import KINDS, Entry, Reading
from .errors import BookError
from .journal import after_write, insert, load_hooks, validate
from .timeutil import iso_local, parse_time, shift_at
from .units import (
    from_bar,
    from_c,
    from_l,
    pressure_key,
    temperature_key,
    to_bar,
    to_c,
    to_l,
    volume_key,
)

FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "'")
MAX_FIELD_CHARS = 10_000
MAX_PROBLEMS_SHOWN = 20


@dataclass(frozen=True)
class Prefs:
    """Units of measure for one export (the book stores bar, °C, L)."""

    pressure: str = "bar"
    temperature: str = "C"
    volume: str = "L"

    def number_columns(self) -> set[str]:
        """Columns holding numbers we format ourselves (never neutralised)."""
        p, t, v = (
            pressure_key(self.pressure),
            temperature_key(self.temperature),
            volume_key(self.volume),
        )
        return {f"dp_{p}", f"temp_{t}", f"dp_ref_{p}", f"volume_{v}", *NUMBER_COLUMNS}

    def columns(self) -> list[str]:
        p, t, v = (
            pressure_key(self.pressure),
            temperature_key(self.temperature),
            volume_key(self.volume),
        )
        return [
            "id",
            "time",
            "shift",
            "kind",
            "target",
            "unit",
            "by",
            f"dp_{p}",
            "indicator",
            f"temp_{t}",
            f"dp_ref_{p}",
            "reference",
            "flow_lpm",
            "hours",
            f"volume_{v}",
            "fluid",
            "filtered_um",
            "reason",
            "condition",
            "batch",
            "c4_per_ml",
            "c6_per_ml",
            "c14_per_ml",
            "code",
            "water_ppm",
            "voids",
            "voided_by",
            "note",
        ]


NUMBER_COLUMNS = (
    "flow_lpm",
    "hours",
    "filtered_um",
    "c4_per_ml",
    "c6_per_ml",
    "c14_per_ml",
    "water_ppm",
)


def neutralise(text: str) -> str:
    """A cell a spreadsheet would run as a formula gets a leading apostrophe (so does a cell
    that starts with one, so that `restore` gives back exactly what was written)."""
    return "'" + text if text.startswith(FORMULA_START) else text


def restore(text: str) -> str:
    """Undo `neutralise`."""
    return text[1:] if text.startswith("'") and text[1:2] and text[1] in FORMULA_START else text


def _num(value: float | None, digits: int = 4) -> str:
    """A number as plain decimal text, at most `digits` decimals (never 1.2e+06: a count or an
    hour meter keeps every digit)."""
    if value is None:
        return ""
    text = f"{round(value, digits):.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("", "-0") else text


def export_rows(
    book: Book,
    entries: Iterable[Entry],
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
) -> Iterator[dict[str, str]]:
    ctx: dict[str, FilterContext] = contexts(book)
    p, t, v = (
        pressure_key(prefs.pressure),
        temperature_key(prefs.temperature),
        volume_key(prefs.volume),
    )
    columns = prefs.columns()
    span = None
    for e in entries:
        if span is None or not span.holds(e.at):  # entries come in time order: reuse the shift
            span = shift_at(e.at, pattern, local)  # type: ignore[arg-type]
        row = dict.fromkeys(columns, "")
        row.update(
            id=e.id,
            time=iso_local(e.at, local),
            shift=span.name,
            kind=e.kind,
            target=e.target or "",
            unit=e.unit or "",
            by=e.by,
            note=e.note,
            voided_by=e.voided_by or "",
        )
        values = {f.name: getattr(e, f.name) for f in fields(e)}
        for name in ("indicator", "reason", "condition", "batch", "code", "voids", "fluid"):
            if values.get(name) is not None:
                row[name] = str(values[name])
        for name in NUMBER_COLUMNS:
            row[name] = _num(values.get(name))
        if values.get("dp_bar") is not None:
            row[f"dp_{p}"] = _num(from_bar(values["dp_bar"], p))
        if values.get("temp_c") is not None:
            row[f"temp_{t}"] = _num(from_c(values["temp_c"], t), 2)
        if values.get("volume_l") is not None:
            row[f"volume_{v}"] = _num(from_l(values["volume_l"], v), 3)
        if isinstance(e, Reading) and e.dp_bar is not None and e.filter in ctx:
            n = normalise(ctx[e.filter], e)
            if n.dp_ref_bar is not None:
                row[f"dp_ref_{p}"] = _num(from_bar(n.dp_ref_bar, p))
                reference = ctx[e.filter].reference
                assumed = [w for w, a in (("temp", n.temp_assumed), ("flow", n.flow_assumed)) if a]
                row["reference"] = reference.label + (  # type: ignore[union-attr]
                    f"; {' and '.join(assumed)} assumed normal" if assumed else ""
                )
            else:
                row["reference"] = f"not normalised: {n.problem}"
        numbers = prefs.number_columns()
        yield {k: (cell if k in numbers else neutralise(cell)) for k, cell in row.items()}


def write_csv(
    out: IO[str],
    book: Book,
    entries: Iterable[Entry],
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
) -> int:
    writer = csv.DictWriter(out, fieldnames=prefs.columns(), lineterminator="\r\n")
    writer.writeheader()
    count = 0
    for row in export_rows(book, entries, prefs, local, pattern):
        writer.writerow(row)
        count += 1
    return count


# ---- import -------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ImportResult:
    added: int
    skipped: int  # already in the book (same id)


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


def _quantity(
    row: dict[str, str], base: str, unit_keys: dict[str, Any], convert: Any, key_of: Any
) -> float | None:
    """Find e.g. dp + dp_unit, or dp_psi / dp_bar / dp_kpa; return canonical or None."""
    if row.get(base, "").strip():
        unit = row.get(f"{base}_unit", "").strip() or unit_keys["default"]
        return convert(_float(row[base], base), key_of(unit))
    for suffix in unit_keys["all"]:
        text = row.get(f"{base}_{suffix}", "").strip()
        if text:
            return convert(_float(text, f"{base}_{suffix}"), suffix)
    return None


def _float(text: str, name: str) -> float:
    try:
        return float(text.strip().replace(",", "."))
    except ValueError as exc:
        raise BookError(f"{name} '{text[:30]}' is not a number") from exc


def _opt_float(row: dict[str, str], name: str) -> float | None:
    text = row.get(name, "").strip()
    return _float(text, name) if text else None


PRESSURE_COLS = {"default": "bar", "all": ("bar", "psi", "kpa")}
TEMP_COLS = {"default": "C", "all": ("c", "f")}
VOLUME_COLS = {"default": "L", "all": ("l", "gal")}


def _entry_id(text: str) -> str:
    """An entry id as the book writes them: a UUID in its 36-character form."""
    clean = text.strip().lower()
    try:
        if len(clean) == 36 and str(uuid.UUID(clean)) == clean:
            return clean
    except ValueError:
        pass
    raise BookError(f"id '{text[:40]}' is not an entry id (a UUID such as sumpbook writes)")


def entry_from_row(row: dict[str, str], local: tzinfo) -> Entry:
    kind = row.get("kind", "").strip().lower()
    if kind not in KINDS:
        raise BookError(f"kind '{kind[:20]}' is unknown: use {', '.join(KINDS)}")
    cls = KINDS[kind]
    time_text = row.get("time", "").strip()
    if not time_text:
        raise BookError("time is empty")
    values: dict[str, Any] = {
        "at": parse_time(time_text, local),
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
    numbers = {
        "dp_bar": lambda: _quantity(row, "dp", PRESSURE_COLS, to_bar, pressure_key),
        "temp_c": lambda: _quantity(row, "temp", TEMP_COLS, to_c, temperature_key),
        "volume_l": lambda: _quantity(row, "volume", VOLUME_COLS, to_l, volume_key),
    }
    for name, get_value in numbers.items():
        if name in names:
            values[name] = get_value()
    if "filtered_um" in names and row.get("filtered_um", "").strip().lower() == "unfiltered":
        row = {**row, "filtered_um": ""}  # the word the export may write for no cart
    for name in (
        "flow_lpm",
        "hours",
        "filtered_um",
        "c4_per_ml",
        "c6_per_ml",
        "c14_per_ml",
        "water_ppm",
    ):
        if name in names:
            values[name] = _opt_float(row, name)
    for name in ("indicator", "reason", "condition", "batch", "code", "voids", "fluid"):
        if name in names and row.get(name, "").strip():
            values[name] = row[name].strip()
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
    """Every column import understands: what export writes in any units, plus value+unit pairs."""
    names = set(Prefs().columns())
    for p in PRESSURE_COLS["all"]:
        names |= {f"dp_{p}", f"dp_ref_{p}"}
    names |= {f"temp_{t}" for t in TEMP_COLS["all"]}
    names |= {f"volume_{v}" for v in VOLUME_COLS["all"]}
    return names | {"dp", "dp_unit", "temp", "temp_unit", "volume", "volume_unit"}


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


def parse_csv(text: str, local: tzinfo) -> tuple[list[tuple[int, Entry]], list[tuple[int, str]]]:
    """Rows -> entries with their line numbers, and every problem found (line, message)."""
    old_limit = csv.field_size_limit(MAX_FIELD_CHARS)
    try:
        return _parse(csv.reader(io.StringIO(text, newline=""), strict=True), local)
    finally:
        csv.field_size_limit(old_limit)


def _parse(reader: Any, local: tzinfo) -> tuple[list[tuple[int, Entry]], list[tuple[int, str]]]:
    entries: list[tuple[int, Entry]] = []
    problems: list[tuple[int, str]] = []
    seen: dict[str, int] = {}

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
            try:
                entry = entry_from_row(row, local)
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
    return entries, problems


def import_csv(book: Book, data: bytes, local: tzinfo) -> ImportResult:
    """Read entries from CSV bytes. One bad row rejects the file: nothing is written, and
    every problem (reading the file or checking it against the book) is named by line."""
    entries, problems = parse_csv(decode(data), local)
    added = skipped = 0
    now = book.now()
    written: list[Entry] = []
    load_hooks()
    try:
        with book.atomic():
            for line, entry in entries:
                if entry.id and _exists(book, entry.id):
                    skipped += 1
                    continue
                try:
                    entry = validate(book, entry, now)
                    entry = replace(entry, id=entry.id or str(uuid.uuid4()), logged=now)
                    insert(book, entry, hooks=False)
                    written.append(entry)
                    added += 1
                except (ValueError, OverflowError) as exc:  # BookError is a ValueError
                    problems.append((line, f"line {line}: {one_line(str(exc))}"))
            if problems:
                raise _Rejected
            after_write(book, written)  # derived status, once per filter touched
    except _Rejected:
        pass
    if problems:
        lines = [text for _, text in sorted(problems, key=lambda p: p[0])]
        extra = len(lines) - MAX_PROBLEMS_SHOWN
        shown = lines[:MAX_PROBLEMS_SHOWN] + ([f"… and {extra} more"] if extra > 0 else [])
        raise BookError("nothing imported; " + "; ".join(shown))
    return ImportResult(added, skipped)


class _Rejected(Exception):
    pass


def _exists(book: Book, entry_id: str) -> bool:
    return (
        book.conn.execute("SELECT 1 FROM entries WHERE id = ?", [entry_id]).fetchone() is not None
    )
