"""The round: which filters to read this shift, in walking order, what to read on each and why.

A filter is on the round when its next-reading time (store/forecast/readplan.py) falls before
the shift ends, when it carries a flag, or when it was never read. Walking order: unit, then
position (tag), as a technician walks the plant. A position left unread is recorded as a note
on its unit with a structured first line (`skip_note`), so the book keeps why.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime

from store.base.errors import BookError
from store.base.timeutil import ShiftSpan, iso_local, next_shift, shift_at
from store.base.validate import one_line
from store.db.book import Book
from store.health.status_model import FilterStatus
from store.ledger.entries import Note
from store.ledger.journal import read
from store.ledger.register import Unit, list_all
from store.views import watch

# Why a filter is on the round, in the order they are shown.
WHY_WORDS = {
    "flagged": "flagged",
    "overdue": "not read for its interval",
    "never-read": "never read",
    "near-turn": "near its turn",
    "due": "due",
}
# Flags that do not by themselves put a filter on the round: reading-overdue is "overdue";
# no-limits is a register matter, hot is the unit's, a cold-start bypass is the warm-up's.
_ROUND_FLAGS_SKIP = ("reading-overdue", "no-limits", "hot", "cold-start-bypass")
SKIP_PREFIX = "round skip:"  # first words of a skip note (see skip_note)
SKIP_REASONS = ("no access", "unit stopped", "guard in place", "gauge broken", "other")
_SKIP_RE = re.compile(r"^round skip: (?P<filter>\S+) - (?P<reason>[^\n]*)")


@dataclass(frozen=True)
class Stop:
    """One filter on the round."""

    unit: str
    filter: str
    kind: str
    reads: tuple[str, ...]  # what to read there: "ΔP gauge" or "indicator", "temperature", ...
    why: tuple[str, ...]  # keys of WHY_WORDS
    read_by: datetime | None
    flags: tuple[str, ...]
    percent_of_limit: float | None
    last_reading: datetime | None
    gauge: bool

    @property
    def why_text(self) -> str:
        return ", ".join(WHY_WORDS[w] for w in self.why)


@dataclass(frozen=True)
class Round:
    span: ShiftSpan
    as_of: datetime
    stops: tuple[Stop, ...]


def reads_of(f: FilterStatus, hour_meter: bool) -> tuple[str, ...]:
    """What to read at a filter: its gauge or indicator, the fluid temperature, the unit's hour
    meter where it has one."""
    return ("ΔP gauge" if f.gauge else "indicator", "temperature") + (
        ("hour meter",) if hour_meter else ()
    )


def why_on_round(f: FilterStatus, until: datetime) -> tuple[str, ...]:
    """Why the filter is on a round ending at `until` (empty: it is not)."""
    why = []
    if any(flag not in _ROUND_FLAGS_SKIP for flag in f.flags):
        why.append("flagged")
    if "reading-overdue" in f.flags:
        why.append("overdue")
    if f.reading_at is None and f.changed_at is None:
        why.append("never-read")
    turning = f.state == "check-now" or (
        f.next_rule in ("shift", "change") and "flagged" not in why
    )
    if f.due is not None and f.due.earliest < until:
        turning = True
    if turning and f.state not in ("past-limit", "past-bypass"):
        why.append("near-turn")
    if f.next_reading is not None and f.next_reading < until and not why:
        why.append("due")
    return tuple(why)


def stops_from(
    filters: Sequence[FilterStatus], meters: dict[str, bool], until: datetime
) -> list[Stop]:
    """The round's stops from statuses (any order), in walking order: unit, then position."""
    out = []
    for f in filters:
        why = why_on_round(f, until)
        if not why:
            continue
        out.append(
            Stop(
                unit=f.unit,
                filter=f.filter,
                kind=f.kind,
                reads=reads_of(f, meters.get(f.unit.upper(), False)),
                why=why,
                read_by=f.next_reading,
                flags=f.flags,
                percent_of_limit=f.percent_of_limit,
                last_reading=f.reading_at,
                gauge=f.gauge,
            )
        )
    out.sort(key=lambda s: (s.unit.upper(), s.filter.upper()))
    return out


def plan_round(book: Book, unit: str | None = None, following: bool = False) -> Round:
    """The round of the shift on now (or, `following`, of the next one, as the book stands
    now), of the plant or one unit. Never writes."""
    now = book.now()
    pattern, local = book.shift_pattern(), book.local_zone()
    span = shift_at(now, pattern, local)
    if following:
        span = next_shift(span, pattern, local)
    w = watch(book, unit=unit)
    meters = {u.tag.upper(): u.hour_meter for u in list_all(book, Unit)}
    return Round(span, now, tuple(stops_from(w.filters, meters, span.end)))


def round_rows(r: Round, local) -> list[dict[str, str]]:  # noqa: ANN001 - a tzinfo
    """The round as rows for a clipboard: one per stop, a blank column for the value."""
    return [
        {
            "order": str(i),
            "unit": s.unit,
            "filter": s.filter,
            "kind": s.kind,
            "read": " + ".join(s.reads),
            "why": s.why_text,
            "read_by": iso_local(s.read_by, local) if s.read_by else "",
            "percent_of_limit": "" if s.percent_of_limit is None else f"{s.percent_of_limit:.0f}",
            "value": "",
        }
        for i, s in enumerate(r.stops, 1)
    ]


def round_csv(r: Round, local) -> str:  # noqa: ANN001 - a tzinfo
    """The round as CSV text (header first). Cells that a spreadsheet would read as a
    formula are quoted with a leading apostrophe."""
    rows = round_rows(r, local)
    out = io.StringIO()
    fields = ["order", "unit", "filter", "kind", "read", "why", "read_by",
              "percent_of_limit", "value"]  # fmt: skip
    w = csv.DictWriter(out, fields, lineterminator="\r\n")
    w.writeheader()
    for row in rows:
        w.writerow({k: _cell(v) for k, v in row.items()})
    return out.getvalue()


def _cell(text: str) -> str:
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r", "'") else text


def skip_note(stop: Stop, reason: str, by: str, at: datetime | None = None) -> Note:
    """A skipped stop as a note on its unit: first line `round skip: <filter> - <reason>`."""
    reason = one_line(reason.strip(), 120)
    if not reason:
        raise BookError("say why the filter was not read")
    return Note(unit=stop.unit, by=by, at=at, note=f"{SKIP_PREFIX} {stop.filter} - {reason}")


def parse_skip(note: str) -> tuple[str, str] | None:
    """(filter, reason) of a skip note, or None for any other note."""
    m = _SKIP_RE.match(note)
    return (m["filter"], m["reason"]) if m else None


def skipped_in(book: Book, span: ShiftSpan) -> dict[str, str]:
    """Filters skipped on a round in the shift, by upper-case tag: the reason."""
    out = {}
    for e in read(book, kinds=["note"], since=span.start, until=span.end):
        if e.voided:
            continue
        found = parse_skip(e.note)
        if found:
            out[found[0].upper()] = found[1]
    return out
