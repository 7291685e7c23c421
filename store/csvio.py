"""The shift log as CSV: export, and import back (all or nothing).

Columns (in this order; units in the header names, times ISO 8601 with offset):
see EXPORT_COLUMNS and README "CSV shift log". Text cells that a spreadsheet would run
as a formula are written with a leading apostrophe; import takes it off again.
"""

from __future__ import annotations

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
from .journal import insert, validate
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
TEXT_COLUMNS = ("by", "target", "reason", "condition", "batch", "code", "note", "fluid")
MAX_FIELD_CHARS = 10_000


@dataclass(frozen=True)
class Prefs:
    """Units of measure for one export (the book stores bar, °C, L)."""

    pressure: str = "bar"
    temperature: str = "C"
    volume: str = "L"

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


def neutralise(text: str) -> str:
    return "'" + text if text.startswith(FORMULA_START) else text


def restore(text: str) -> str:
    return text[1:] if text.startswith("'") and text[1:2] and text[1] in FORMULA_START else text


def _num(value: float | None, digits: int = 4) -> str:
    return "" if value is None else f"{round(value, digits):g}"


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
    for e in entries:
        row = dict.fromkeys(prefs.columns(), "")
        row.update(
            id=e.id,
            time=iso_local(e.at, local),
            shift=shift_at(e.at, pattern, local).name,  # type: ignore[arg-type]
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
        for name in (
            "flow_lpm",
            "hours",
            "filtered_um",
            "c4_per_ml",
            "c6_per_ml",
            "c14_per_ml",
            "water_ppm",
        ):
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
        for name in TEXT_COLUMNS:
            row[name] = neutralise(row[name])
        yield row


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
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    if b"\x00" in data:
        raise BookError("the file is not CSV text (it holds NUL bytes)")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise BookError(
            f"the file is not UTF-8 text (byte {exc.start}): save it as 'CSV UTF-8' and try again"
        ) from exc


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
        values["id"] = row["id"].strip().lower()
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


def parse_csv(text: str, local: tzinfo) -> tuple[list[tuple[int, Entry]], list[str]]:
    """Rows -> entries with their line numbers, and every problem found."""
    csv.field_size_limit(MAX_FIELD_CHARS)
    reader = csv.DictReader(io.StringIO(text, newline=""))
    if not reader.fieldnames:
        raise BookError("the file is empty")
    header = [(h or "").strip().lower() for h in reader.fieldnames]
    missing = [c for c in ("time", "kind", "by") if c not in header]
    if missing:
        raise BookError(f"the header lacks the column(s) {', '.join(missing)}")
    reader.fieldnames = header
    entries, problems = [], []
    line = 1
    try:
        for raw in reader:
            line = reader.line_num
            if None in raw:
                problems.append(f"line {line}: more cells than the header has columns")
                continue
            row = {k: restore(v or "") for k, v in raw.items()}
            if not any(v.strip() for v in row.values()):
                continue
            try:
                entries.append((line, entry_from_row(row, local)))
            except BookError as exc:
                problems.append(f"line {line}: {exc}")
    except csv.Error as exc:
        problems.append(f"line {reader.line_num}: {exc}")
    return entries, problems


def import_csv(book: Book, data: bytes, local: tzinfo) -> ImportResult:
    """Read entries from CSV bytes. One bad row rejects the file: nothing is written."""
    entries, problems = parse_csv(decode(data), local)
    added = skipped = 0
    now = book.now()
    # Rows that parsed are still checked against the book when others did not, so that
    # one pass reports every bad line; the transaction is rolled back in that case.
    if entries:
        try:
            with book.atomic():
                for line, entry in entries:
                    if entry.id and _exists(book, entry.id):
                        skipped += 1
                        continue
                    try:
                        entry = validate(book, entry, now)
                        entry = replace(entry, id=entry.id or str(uuid.uuid4()), logged=now)
                        insert(book, entry)
                        added += 1
                    except BookError as exc:
                        problems.append(f"line {line}: {exc}")
                if problems:
                    raise _Rejected
        except _Rejected:
            pass
    if problems:
        problems.sort(key=_line_of)
        shown = problems[:20] + ([f"… and {len(problems) - 20} more"] if len(problems) > 20 else [])
        raise BookError("nothing imported; " + "; ".join(shown))
    return ImportResult(added, skipped)


def _line_of(problem: str) -> int:
    digits = problem.removeprefix("line ").split(":", 1)[0]
    return int(digits) if digits.isdigit() else 0


class _Rejected(Exception):
    pass


def _exists(book: Book, entry_id: str) -> bool:
    return (
        book.conn.execute("SELECT 1 FROM entries WHERE id = ?", [entry_id]).fetchone() is not None
    )
