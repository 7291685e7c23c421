"""The shift-log CSV written the slow, plain way: one `Entry` at a time through `csv.DictWriter`.

This was sumpbook's first exporter. It is kept here, and only here, as the oracle the one
exporter (`store/exchange/csvexport.py`) is held to byte for byte (tests/store/test_csvexport.py). It does
not use the column table of `store/exchange/csvcolumns.py`: the header and every cell rule are written
out again below, so that a mistake in the table shows up as a difference.

The status rows of a handover (`status_at`) are written from what the shift-log screen shows:
`sheets.watch_rows` of `views.watch(as_of=...)`, in that list's order, kept when flagged or
when a change window, a swap or a reading falls before the end of the next shift.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable, Iterator
from dataclasses import fields
from datetime import datetime, tzinfo
from typing import IO

from store.base.prefs import Prefs
from store.base.timeutil import iso_local, next_shift, shift_at
from store.base.units import from_bar, from_c, from_l, pressure_key, temperature_key, volume_key
from store.db.book import Book
from store.health.conditions import FilterContext, contexts, normalise
from store.health.status_model import FLAG_WORDS
from store.ledger.entries import Entry, Reading, TopUp

FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "'")
NUMBER_COLUMNS = (
    "flow_lpm",
    "hours",
    "filtered_um",
    "c4_per_ml",
    "c6_per_ml",
    "c14_per_ml",
    "water_ppm",
)
TEXT_COLUMNS = ("indicator", "reason", "condition", "batch", "voids", "fluid")
ISO_CODE = re.compile(r"[0-9<>-]{1,3}(/[0-9<>-]{1,3}){1,2}")


STATUS_HEADER = ["flags", "due_earliest", "due", "next_reading"]


def header(prefs: Prefs) -> list[str]:
    p, t, v = (
        pressure_key(prefs.pressure),
        temperature_key(prefs.temperature),
        volume_key(prefs.volume),
    )
    return [
        "id", "time", "shift", "kind", "target", "unit", "by", f"dp_{p}", "indicator",
        f"temp_{t}", f"dp_ref_{p}", "reference", "flow_lpm", "hours", f"volume_{v}", "fluid",
        "filtered_um", "reason", "condition", "batch", "c4_per_ml", "c6_per_ml", "c14_per_ml",
        "code", "water_ppm", "voids", "voided_by", "note",
    ]  # fmt: skip


def neutralise(text: str) -> str:
    return "'" + text if text.startswith(FORMULA_START) else text


def num(value: float | None, digits: int = 4) -> str:
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
    columns = header(prefs)
    numbers = {f"dp_{p}", f"temp_{t}", f"dp_ref_{p}", f"volume_{v}", *NUMBER_COLUMNS}
    span = None
    for e in entries:
        if span is None or not span.holds(e.at):
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
        for name in TEXT_COLUMNS:
            if values.get(name) is not None:
                row[name] = str(values[name])
        for name in NUMBER_COLUMNS:
            row[name] = num(values.get(name))
        if isinstance(e, TopUp) and e.filtered_um is None:
            row["filtered_um"] = "unfiltered"
        code = values.get("code")
        if code is not None:
            text = str(code)
            row["code"] = f'="{text}"' if ISO_CODE.fullmatch(text) else neutralise(text)
        if values.get("dp_bar") is not None:
            row[f"dp_{p}"] = num(from_bar(values["dp_bar"], p))
        if values.get("temp_c") is not None:
            row[f"temp_{t}"] = num(from_c(values["temp_c"], t), 2)
        if values.get("volume_l") is not None:
            row[f"volume_{v}"] = num(from_l(values["volume_l"], v), 3)
        if isinstance(e, Reading) and e.dp_bar is not None and e.filter in ctx:
            n = normalise(ctx[e.filter], e)
            if n.dp_ref_bar is not None:
                row[f"dp_ref_{p}"] = num(from_bar(n.dp_ref_bar, p))
                label = ctx[e.filter].reference.label  # type: ignore[union-attr]
                if t == "f":
                    normal_c = ctx[e.filter].unit.normal_temp_c
                    label = label.replace(
                        f"({normal_c:g} °C)", f"({num(normal_c * 1.8 + 32, 1)} °F)"
                    )
                assumed = [w for w, a in (("temp", n.temp_assumed), ("flow", n.flow_assumed)) if a]
                row["reference"] = label + (
                    f"; {' and '.join(assumed)} assumed normal" if assumed else ""
                )
            else:
                row["reference"] = f"not normalised: {n.problem}"
        yield {
            k: (cell if k in numbers or k == "code" else neutralise(cell))
            for k, cell in row.items()
        }


def status_dicts(
    book: Book,
    as_of: datetime,
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
) -> Iterator[dict[str, str]]:
    """The handover's rows as of `as_of`, the plain way."""
    from store.sheets import watch_rows
    from store.views import watch

    horizon = next_shift(shift_at(as_of, pattern, local), pattern, local).end
    p = pressure_key(prefs.pressure)
    columns = header(prefs) + STATUS_HEADER
    for r in watch_rows(watch(book, as_of=as_of)):
        earliest = r.due.earliest if r.due else None
        soon = [t for t in (earliest, r.next_reading) if t is not None and t < horizon]
        if not (r.flags or soon):
            continue
        row = dict.fromkeys(columns, "")
        row.update(
            time=iso_local(as_of, local),
            shift=shift_at(as_of, pattern, local).name,
            kind="status",
            target=r.tag,
            unit=r.unit,
            flags="; ".join(FLAG_WORDS.get(f, f) for f in r.flags),
            due_earliest=iso_local(earliest, local) if earliest else "",
            due=iso_local(r.due.likely, local) if r.due else "",
            next_reading=iso_local(r.next_reading, local) if r.next_reading else "",
            note="" if r.what == "breather" else "; ".join(r.notes),
        )
        row[f"dp_ref_{p}"] = num(from_bar(r.dp_ref_bar, p)) if r.dp_ref_bar is not None else ""
        yield {k: (cell if k == f"dp_ref_{p}" else neutralise(cell)) for k, cell in row.items()}


def write_csv(
    out: IO[str],
    book: Book,
    entries: Iterable[Entry],
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
    status_at: datetime | None = None,
    status: bool = False,
) -> int:
    """The entries; with `status`, the status columns, and the status rows as of `status_at`
    (none when it is None)."""
    names = header(prefs) + (STATUS_HEADER if status else [])
    writer = csv.DictWriter(out, fieldnames=names, lineterminator="\r\n", restval="")
    writer.writeheader()
    count = 0
    for row in export_rows(book, entries, prefs, local, pattern):
        writer.writerow(row)
        count += 1
    if status and status_at is not None:
        for row in status_dicts(book, status_at, prefs, local, pattern):
            writer.writerow(row)
    return count
