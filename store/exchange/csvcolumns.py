"""The shift-log CSV's columns: one table that the export writes from and the import reads with.

Each `Column` says what its header is in the user's units, how a value becomes a cell and how
a cell is read back. `store/exchange/csvexport.py` (the one exporter) and `store/exchange/csvio.py` (import)
both work from `COLUMNS`; a new entry field is one line here.

Cells for a spreadsheet: every text cell that a spreadsheet would run as a formula (leading
=, +, -, @, tab, CR) is written with a leading apostrophe, which import takes off again; an
ISO 4406 code is written as `="18/16/13"` so that a spreadsheet shows it as text, not as a
date; a top-up that went in unfiltered says `unfiltered` in `filtered_um`.

After the entries, a shift log carries the status of the positions a handover needs
(`csvexport.status_rows`): rows whose `kind` is `status` (`STATUS_KIND`), with four columns of
their own at the end (`STATUS_COLUMNS`). They are written, never read back: import passes them
over and says how many. A file without them (`export --entries-only`) has exactly the entry
columns.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.units import (
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
UNFILTERED = "unfiltered"
# What an ISO 4406 code cell may hold to be written as ="…" (digits, dashes, slashes only:
# nothing a formula could do harm with).
_CODE_TEXT = re.compile(r"[0-9<>-]{1,3}(/[0-9<>-]{1,3}){1,2}")
_CODE_FORMULA = re.compile(r'="([0-9<>-]{1,3}(?:/[0-9<>-]{1,3}){1,2})"')


def header(prefs: Prefs, status: bool = False) -> list[str]:
    """The header of a CSV shift log in the user's units, in order; with `status`, the
    status rows' own columns at the end."""
    keys = prefs.unit_keys()
    return [c.header(keys) for c in (*COLUMNS, *(STATUS_COLUMNS if status else ()))]


def neutralise(text: str) -> str:
    """A cell a spreadsheet would run as a formula gets a leading apostrophe (so does a cell
    that starts with one, so that `restore` gives back exactly what was written)."""
    return "'" + text if text.startswith(FORMULA_START) else text


def restore(text: str) -> str:
    """Undo `neutralise`."""
    return text[1:] if text.startswith("'") and text[1:2] and text[1] in FORMULA_START else text


def number_text(value: float, digits: int = 4) -> str:
    """A number as plain decimal text, at most `digits` decimals (never 1.2e+06: a count or an
    hour meter keeps every digit)."""
    text = f"{round(value, digits):.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("", "-0") else text


def code_cell(code: Any) -> str:
    """An ISO 4406 code as a cell a spreadsheet keeps as text: ="18/16/13"."""
    text = str(code)
    return f'="{text}"' if _CODE_TEXT.fullmatch(text) else neutralise(text)


def code_value(cell: str) -> str | None:
    """A code cell as written by `code_cell` (or plain, as older files have it) -> the code."""
    text = cell.strip()
    found = _CODE_FORMULA.fullmatch(text)
    return (found.group(1) if found else text) or None


def filtered_value(cell: str) -> float | None:
    """`filtered_um`: µm, or 'unfiltered' (older files leave it empty) -> None."""
    text = cell.strip()
    if not text or text.lower() == UNFILTERED:
        return None
    return parse_number(text, "filtered_um")


def parse_number(text: str, name: str) -> float:
    try:
        return float(text.strip().replace(",", ".")) + 0.0  # a cell of '-0' is zero
    except ValueError as exc:
        raise BookError(f"{name} '{text[:30]}' is not a number") from exc


# quantity -> (to canonical, from canonical, every unit key import understands, default key)
QUANTITIES: dict[
    str, tuple[Callable[[float, str], float], Callable[[float, str], float], tuple[str, ...], str]
] = {  # fmt: skip
    "pressure": (to_bar, from_bar, ("bar", "psi", "kpa"), "bar"),
    "temperature": (to_c, from_c, ("c", "f"), "c"),
    "volume": (to_l, from_l, ("l", "gal"), "l"),
}
QUANTITY_KEYS = {"pressure": pressure_key, "temperature": temperature_key, "volume": volume_key}


@dataclass(frozen=True)
class Column:
    """One CSV column.

    `name`: the header without a unit ('dp', 'filtered_um'); `field`: the entry field (and
    `entries` column) it holds, canonical units, or None when the export works the cell out
    (time, shift, reference) or the import reads it on its own (id, kind, target);
    `quantity`: 'pressure' / 'temperature' / 'volume' when the header carries the user's unit
    (`dp_psi`); `cell`: 'text', 'number', 'code' or 'filtered' (how a value is written and
    read); `digits`: decimals of a number; `derived`: written by the export, never read.
    """

    name: str
    field: str | None = None
    quantity: str | None = None
    cell: str = "text"
    digits: int = 4
    derived: bool = False

    def header(self, keys: dict[str, str]) -> str:
        return f"{self.name}_{keys[self.quantity]}" if self.quantity else self.name

    def headers(self) -> set[str]:
        """Every header import takes for this column (any unit)."""
        if self.quantity is None:
            return {self.name}
        return {f"{self.name}_{k}" for k in QUANTITIES[self.quantity][2]}

    def writer(self, keys: dict[str, str]) -> Callable[[Any], str]:
        """value (never None) -> the cell's text, before CSV quoting."""
        if self.quantity is not None:
            convert, key, digits = QUANTITIES[self.quantity][1], keys[self.quantity], self.digits
            return lambda value: number_text(convert(value, key), digits)
        if self.cell in ("number", "filtered"):
            digits = self.digits
            return lambda value: number_text(value, digits)
        if self.cell == "code":
            return code_cell
        return lambda value: neutralise(value if type(value) is str else str(value))

    def empty(self, kind: str) -> str:
        """The cell of a NULL value in an entry of `kind`."""
        return UNFILTERED if self.cell == "filtered" and kind == "topup" else ""

    def read(self, row: dict[str, str]) -> Any:
        """This column's value from an imported row (cells already `restore`d), or None."""
        if self.quantity is not None:
            return _quantity(row, self.name, self.quantity)
        text = row.get(self.name, "")
        if self.cell == "number":
            return parse_number(text, self.name) if text.strip() else None
        if self.cell == "filtered":
            return filtered_value(text)
        if self.cell == "code":
            return code_value(text)
        return text.strip() or None


def _quantity(row: dict[str, str], base: str, quantity: str) -> float | None:
    """e.g. dp + dp_unit, or dp_psi / dp_bar / dp_kpa -> canonical value, or None."""
    to_canonical, _, keys, default = QUANTITIES[quantity]
    if row.get(base, "").strip():
        unit = row.get(f"{base}_unit", "").strip() or default
        return to_canonical(parse_number(row[base], base), QUANTITY_KEYS[quantity](unit))
    for key in keys:
        text = row.get(f"{base}_{key}", "").strip()
        if text:
            return to_canonical(parse_number(text, f"{base}_{key}"), key)
    return None


COLUMNS: tuple[Column, ...] = (
    Column("id"),
    Column("time", derived=True),  # the entry's time, plant-local with its offset
    Column("shift", derived=True),
    Column("kind"),
    Column("target"),  # the filter, breather or unit tag the entry is about
    Column("unit", "unit"),
    Column("by", "by"),
    Column("dp", "dp_bar", "pressure"),
    Column("indicator", "indicator"),
    Column("temp", "temp_c", "temperature", digits=2),
    Column("dp_ref", None, "pressure", derived=True),  # ΔP at the reference condition
    Column("reference", derived=True),  # that condition, or why there is no reference ΔP
    Column("flow_lpm", "flow_lpm", cell="number"),
    Column("hours", "hours", cell="number"),
    Column("volume", "volume_l", "volume", digits=3),
    Column("fluid", "fluid"),
    Column("filtered_um", "filtered_um", cell="filtered"),
    Column("reason", "reason"),
    Column("condition", "condition"),
    Column("batch", "batch"),
    Column("c4_per_ml", "c4_per_ml", cell="number"),
    Column("c6_per_ml", "c6_per_ml", cell="number"),
    Column("c14_per_ml", "c14_per_ml", cell="number"),
    Column("code", "code", cell="code"),
    Column("water_ppm", "water_ppm", cell="number"),
    Column("voids", "voids"),
    Column("voided_by", derived=True),
    Column("note", "note"),
)
# The `kind` of a status row, and the columns only status rows fill (written after COLUMNS,
# never read back): the flags in the words the app shows, the change (or swap) window's
# earliest and likely dates, the next reading's time, all plant-local as `time` is.
STATUS_KIND = "status"
STATUS_COLUMNS: tuple[Column, ...] = (
    Column("flags", derived=True),
    Column("due_earliest", derived=True),
    Column("due", derived=True),
    Column("next_reading", derived=True),
)
# The columns that carry an entry field (the ones a new kind's new field adds to).
VALUE_COLUMNS = tuple(c for c in COLUMNS if c.field is not None)


def known_headers() -> set[str]:
    """Every header import understands: what export writes in any units, plus value+unit
    pairs (dp + dp_unit ...)."""
    names: set[str] = set()
    for c in (*COLUMNS, *STATUS_COLUMNS):
        names |= c.headers()
        if c.quantity is not None and not c.derived:
            names |= {c.name, f"{c.name}_unit"}
    return names


def reference_cell(label: str, normal_temp_c: float, temperature: str) -> str:
    """A reference condition's label in the user's temperature unit: the store words it in
    °C ('ν 27.8 mm²/s (50 °C)'); under a temp_f header it reads '(122 °F)'."""
    if temperature_key(temperature) == "c":
        return label
    celsius = f"({normal_temp_c:g} °C)"
    fahrenheit = f"({number_text(from_c(normal_temp_c, 'f'), 1)} °F)"
    return label.replace(celsius, fahrenheit, 1)
