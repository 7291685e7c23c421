"""Entry kinds: what a technician records. One dataclass per kind.

Entries are append-only. A mistaken entry is voided by a later `Void` that names
it; both stay in the book. Adding a kind: see DEVELOPERS.md.
"""

from __future__ import annotations

from dataclasses import field, fields
from datetime import datetime
from typing import Any, ClassVar

from store.base.records import frozen_record
from store.base.timeutil import parse_utc


@frozen_record(kw_only=True)
class Entry:
    """What every entry has. `id` and `at` are filled in by `journal.log` when left empty."""

    kind: ClassVar[str] = ""
    target_table: ClassVar[str | None] = None  # which register table `target` names

    id: str = ""
    at: datetime | None = None  # UTC
    by: str = ""
    note: str = ""
    unit: str | None = None  # filled from the target for filter and breather entries
    logged: datetime | None = None  # when it was written (UTC), set by the book
    voided_by: str | None = field(default=None, compare=False)  # set when read back

    @property
    def target(self) -> str | None:
        return self.unit

    @property
    def voided(self) -> bool:
        return self.voided_by is not None


@frozen_record(kw_only=True)
class Reading(Entry):
    """A ΔP gauge value and/or the indicator's state, with the fluid temperature."""

    kind: ClassVar[str] = "reading"
    target_table: ClassVar[str | None] = "filters"
    filter: str
    dp_bar: float | None = None
    indicator: str | None = None  # clean / dirty / bypass
    temp_c: float | None = None
    flow_lpm: float | None = None
    hours: float | None = None  # hour meter

    @property
    def target(self) -> str | None:
        return self.filter


@frozen_record(kw_only=True)
class ElementChange(Entry):
    kind: ClassVar[str] = "change"
    target_table: ClassVar[str | None] = "filters"
    filter: str
    reason: str = "limit"  # limit / indicator / interval / bypass / damage / other
    condition: str = ""  # the old element as found
    batch: str = ""  # the new element's batch or lot
    hours: float | None = None

    @property
    def target(self) -> str | None:
        return self.filter


@frozen_record(kw_only=True)
class TopUp(Entry):
    kind: ClassVar[str] = "topup"
    target_table: ClassVar[str | None] = "units"
    volume_l: float
    fluid: str | None = None
    filtered_um: float | None = None  # None = went in unfiltered
    hours: float | None = None


@frozen_record(kw_only=True)
class BreatherSwap(Entry):
    kind: ClassVar[str] = "breather"
    target_table: ClassVar[str | None] = "breathers"
    breather: str
    reason: str = "interval"
    condition: str = ""  # desiccant as found, e.g. "2/3 spent"

    @property
    def target(self) -> str | None:
        return self.breather


@frozen_record(kw_only=True)
class Sample(Entry):
    """A fluid sample result: counts per mL at ≥4/≥6/≥14 µm(c) and/or the code, water."""

    kind: ClassVar[str] = "sample"
    target_table: ClassVar[str | None] = "units"
    c4_per_ml: float | None = None
    c6_per_ml: float | None = None
    c14_per_ml: float | None = None
    code: str | None = None
    water_ppm: float | None = None


@frozen_record(kw_only=True)
class Note(Entry):
    kind: ClassVar[str] = "note"
    target_table: ClassVar[str | None] = "units"


@frozen_record(kw_only=True)
class Void(Entry):
    """Cancels an earlier entry; `note` holds the reason."""

    kind: ClassVar[str] = "void"
    voids: str

    @property
    def target(self) -> str | None:
        return None


KINDS: dict[str, type[Entry]] = {
    cls.kind: cls for cls in (Reading, ElementChange, TopUp, BreatherSwap, Sample, Note, Void)
}
TARGET_COLUMN = {"filters": "filter", "breathers": "breather", "units": "unit"}


def entry_columns(cls: type[Entry]) -> list[str]:
    """The dataclass fields that are columns of `entries` (all but the read-back ones)."""
    return [f.name for f in fields(cls) if f.name not in ("at", "logged", "voided_by")]


def from_row(row: dict[str, Any], voided_by: str | None = None) -> Entry:
    cls = KINDS[row["kind"]]
    values = {name: row.get(name) for name in entry_columns(cls)}
    values["note"] = values.get("note") or ""
    for text_field in ("reason", "condition", "batch"):
        if text_field in values and values[text_field] is None:
            values[text_field] = ""
    return cls(
        **values,
        at=parse_utc(row["at_utc"]),
        logged=parse_utc(row["logged_utc"]),
        voided_by=voided_by if voided_by is not None else row.get("voided_by"),
    )
