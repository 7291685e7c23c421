"""Rich tables and lines for the command line (the app has its own widgets)."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, tzinfo

from rich.table import Table
from rich.text import Text

from store import Book
from store.base.prefs import Prefs
from store.base.text import inert, inert_line
from store.base.timeutil import local_text
from store.base.units import pressure_label
from store.health.conditions import contexts, normalise
from store.health.status_model import FLAG_WORDS, URGENT_FLAGS, Watch
from store.health.urgency import act_now
from store.ledger import register
from store.ledger.entries import (
    BreatherSwap,
    ElementChange,
    Entry,
    Note,
    Reading,
    Sample,
    TopUp,
    Void,
)
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit
from store.physics.cleanliness import compare_to_target, parse_code
from store.rounds import Round
from tui.base import dates
from tui.base.quantities import pressure, temperature, volume
from tui.base.tables import LeanTable

CAUTION_SHORT = (
    "Safety: isolate and lock out, relieve pressure and accumulators, let hot oil cool, wear "
    "eye and skin protection, never feel for leaks by hand. The maker's manual and site "
    "procedures rule."
)
TOPUP_CAUTION_SHORT = (
    "Safety: vent a pressurised reservoir to zero before opening it; hot oil and tank walls "
    "burn. The maker's manual and site procedures rule."
)


def _add_row(table: Table, *cells: object, style: str = "") -> None:
    """A row whose text is shown as written: no markup is read in it, and control and escape
    characters of stored text are made visible (`store.base.text.inert`)."""
    shown = [
        Text(inert(c)) if isinstance(c, str) else _inert_text(c) if isinstance(c, Text) else c
        for c in cells
    ]
    table.add_row(*shown, style=style)  # type: ignore[arg-type]


def _inert_text(text: Text) -> Text:
    plain = inert(text.plain)
    if plain == text.plain:
        return text
    return Text(plain, style=text.style)


def line(text: str) -> Text:
    """One printed line of the command line, inert (`store.base.text.inert`), no markup read."""
    return Text(inert(text))


def when(moment: datetime | None, zone: tzinfo) -> str:
    """A moment in the plant's zone, "–" for none."""
    return local_text(moment, zone) if moment else "–"


def describe(entry: Entry, prefs: Prefs, target_code: str | None = None) -> str:
    """One line saying what the entry holds, in the user's units."""
    if isinstance(entry, Reading):
        parts = []
        if entry.dp_bar is not None:
            parts.append(f"ΔP {pressure(entry.dp_bar, prefs)}")
        if entry.indicator:
            parts.append(f"indicator {entry.indicator}")
        if entry.temp_c is not None:
            parts.append(f"at {temperature(entry.temp_c, prefs)}")
        if entry.flow_lpm is not None:
            parts.append(f"{entry.flow_lpm:g} L/min")
        if entry.hours is not None:
            parts.append(f"meter {entry.hours:.0f} h")
        return ", ".join(parts)
    if isinstance(entry, ElementChange):
        return (
            "element changed ("
            + entry.reason
            + ")"
            + (f"; old: {entry.condition}" if entry.condition else "")
            + (f"; new batch {entry.batch}" if entry.batch else "")
        )
    if isinstance(entry, TopUp):
        how = "unfiltered" if entry.filtered_um is None else f"through {entry.filtered_um:g} µm"
        return f"topped up {volume(entry.volume_l, prefs)} {entry.fluid or ''} {how}".replace(
            "  ", " "
        )
    if isinstance(entry, BreatherSwap):
        return f"breather swapped ({entry.reason})" + (
            f"; desiccant {entry.condition}" if entry.condition else ""
        )
    if isinstance(entry, Sample):
        parts = [f"code {entry.code}"] if entry.code else []
        if entry.code and target_code:
            parts.append(
                compare_to_target(parse_code(entry.code), parse_code(target_code)).describe()
            )
        if entry.water_ppm is not None:
            parts.append(f"water {entry.water_ppm:g} ppm")
        return "sample: " + ", ".join(parts)
    if isinstance(entry, Void):
        return f"voids {entry.voids[:8]}"
    if isinstance(entry, Note):
        return "note"
    return entry.kind


def _target_code(book: Book, entry: Entry) -> str | None:
    if not isinstance(entry, Sample) or not entry.unit:
        return None
    unit = register.find(book, Unit, entry.unit)
    return unit.target_code if unit else None


SAID_BACK = 200  # characters of a note the saved line says back


def saved_line(book: Book, entry: Entry, prefs: Prefs) -> str:
    """What was saved, as the technician typed it back: its values and its note's text (made
    harmless for the terminal, on one line)."""
    target = entry.target or entry.unit or ""
    what = describe(entry, prefs, _target_code(book, entry))
    said = inert_line(entry.note or "").strip()
    if len(said) > SAID_BACK:
        said = said[: SAID_BACK - 1] + "…"  # the whole note is in the book and the listing
    if said:
        what = f'"{said}"' if isinstance(entry, Note) else f'{what}; note "{said}"'
    return (
        f"saved {entry.kind} {entry.id[:8]} {target} {when(entry.at, book.local_zone())} by {entry.by}: "
        f"{what}"
    )


def entries_table(book: Book, entries: list[Entry], prefs: Prefs) -> Table:
    ctxs = contexts(book)
    days = LocalDays.of(book)
    table = LeanTable(title=f"Entries ({len(entries)})", title_justify="left")
    for name in (
        "id",
        "time",
        "kind",
        "target",
        "by",
        "what",
        f"ΔP ref ({pressure_label(prefs.pressure)})",
        "reference",
        "note",
    ):
        table.add_column(name, overflow="fold")
    for e in entries:
        ref = reference = ""
        if isinstance(e, Reading) and e.dp_bar is not None and e.filter in ctxs:
            n = normalise(ctxs[e.filter], e)
            ref = pressure(n.dp_ref_bar, prefs, unit=False) if n.dp_ref_bar is not None else ""
            reference = ctxs[e.filter].reference.label if n.dp_ref_bar is not None else n.problem  # type: ignore[union-attr]
            if n.dp_ref_bar is not None and n.temp_assumed:
                reference += "; temp assumed"
        style = "strike dim" if e.voided else ""
        row = [
            e.id[:8],
            days.when(e.at),
            e.kind + (" (void)" if e.voided else ""),
            e.target or e.unit or "",
            e.by,
            describe(e, prefs, _target_code(book, e)),
            ref,
            reference,
            e.note,
        ]
        _add_row(table, *row, style=style)
    return table


def register_table(book: Book, what: str, unit: str | None, prefs: Prefs) -> Table:
    if what == "shifts":
        table = LeanTable(title="Shift pattern", title_justify="left")
        table.add_column("shift")
        table.add_column("starts")
        for shift in register.list_shifts(book):
            _add_row(table, shift.name, shift.starts)
        return table
    cls = {
        "units": Unit,
        "filters": FilterPosition,
        "breathers": Breather,
        "fluids": Fluid,
        "techs": Technician,
    }[what]
    rows = register.list_all(book, cls, unit)
    table = LeanTable(title=f"{what.capitalize()} ({len(rows)})", title_justify="left")
    if cls is FilterPosition:
        cols = [
            "tag",
            "unit",
            "kind",
            "element",
            "rating",
            "clean",
            "limit",
            "bypass",
            "flow",
            "gauge",
        ]
        for c in cols:
            table.add_column(c)
        for f in rows:
            _add_row(
                table,
                f.tag,
                f.unit,
                f.kind,
                f.element,
                f"{f.rating_um:g} µm {f.rating_basis[:3]}" if f.rating_um else "–",
                pressure(f.clean_bar, prefs),
                pressure(f.limit_bar, prefs),
                pressure(f.bypass_bar, prefs),
                f"{f.normal_flow_lpm:g} L/min" if f.normal_flow_lpm else "–",
                "gauge" if f.gauge else "indicator",
            )
        return table
    if cls is Unit:
        for c in (
            "tag",
            "name",
            "area",
            "reservoir",
            "fluid",
            "normal",
            "limit",
            "coldest start",
            "hour meter",
            "target code",
        ):
            table.add_column(c)
        for u in rows:
            _add_row(
                table,
                u.tag,
                u.name,
                u.area,
                volume(u.reservoir_l, prefs),
                u.fluid or "–",
                temperature(u.normal_temp_c, prefs),
                temperature(u.max_temp_c, prefs),
                temperature(u.coldest_start_c, prefs),
                "yes" if u.hour_meter else "no",
                u.target_code or "–",
            )
        return table
    if cls is Breather:
        for c in ("tag", "unit", "kind", "rating", "swap every"):
            table.add_column(c)
        for b in rows:
            _add_row(
                table,
                b.tag,
                b.unit,
                b.kind,
                f"{b.rating_um:g} µm" if b.rating_um else "–",
                f"{b.swap_interval_d:g} days",
            )
        return table
    if cls is Fluid:
        for c in ("tag", "name", "ISO VG", "ν40 (mm²/s)", "ν100 (mm²/s)", "VI", "density"):
            table.add_column(c)
        for f in rows:
            _add_row(
                table,
                f.tag,
                f.name,
                str(f.iso_vg or "–"),
                _num(f.nu40_cst),
                _num(f.nu100_cst),
                _num(f.vi),
                _num(f.density_kg_l, " kg/L"),
            )
        return table
    for c in ("initials", "name", "active"):
        table.add_column(c)
    for t in rows:
        _add_row(table, t.tag, t.name, "yes" if t.active else "no")
    return table


def _num(value: float | None, suffix: str = "") -> str:
    return "–" if value is None else f"{value:g}{suffix}"


@dataclass(frozen=True)
class LocalDays:
    """The plant's time zone and this year there, read once for a whole table: each read is a
    query of the book's settings, a thousand rows asked them a few thousand times."""

    zone: tzinfo
    this_year: int

    @classmethod
    def of(cls, book: Book) -> LocalDays:
        zone = book.local_zone()
        return cls(zone, book.now().astimezone(zone).year)

    def when(self, moment: datetime | None) -> str:
        return when(moment, self.zone)

    def due_text(self, due) -> str:  # noqa: ANN001 - status_model.Due | None
        """The due window as the app writes it (`tui.base.dates.due_text`)."""
        return dates.due_text(due, self.zone, self.this_year)

    def short_due(self, due) -> str:  # noqa: ANN001 - status_model.Due
        """'16 Dec (10 Dec–11 Jan)': the likely day first, the years only where not this one."""
        last = self._day(due.latest, "%y") if due.latest else "open"
        first = self._day(due.earliest, "%y")
        if due.latest and first.endswith(last[-3:]) and len(first) > 6:
            first = first[:6]  # one year for both ends: '06 Feb–01 May 27'
        return f"{self._day(due.likely, '%y')} ({first}–{last})"

    def due_day(self, moment: datetime | None) -> str:
        """A due day as the app writes it: its year only when not this one."""
        return dates.day_text(moment, self.zone, self.this_year) if moment else "–"

    def _day(self, moment: datetime, year: str) -> str:
        local = moment.astimezone(self.zone)
        return f"{local:%d %b}" if local.year == self.this_year else local.strftime(f"%d %b {year}")


NARROW_COLUMNS = 120  # below this many columns `status` leaves out unit, kind and basis


def watch_table(book: Book, watch: Watch, prefs: Prefs, width: int | None = None) -> Table:
    """Filters, breathers and flagged units in one list, in the app's order (the one order of
    store/health/urgency.py, through store.sheets.watch_rows); OVERDUE said in the due cell.
    Narrower than NARROW_COLUMNS (a terminal of 80): no unit, kind or basis column, no vertical
    rules, the due cell as "16 Dec (10 Dec–11 Jan)", so that a line stays a line."""
    from rich import box

    from store.sheets import watch_rows  # deferred: `status --json` prints no table

    narrow = width is not None and width < NARROW_COLUMNS
    days = LocalDays.of(book)
    table = LeanTable(
        title=f"Watch list as of {days.when(watch.as_of)}",
        title_justify="left",
        box=box.SIMPLE_HEAD if narrow else box.HEAVY_HEAD,
    )
    dp_head = f"ΔP ref ({pressure_label(prefs.pressure)})"
    if narrow:
        for c in ("tag", f"ΔP {pressure_label(prefs.pressure)}", "%", "due"):
            table.add_column(c, no_wrap=True)
        table.add_column("flags", min_width=12)
    else:
        for c in ("tag", "unit", "kind", dp_head, "% limit", "due", "read by", "basis", "flags"):
            table.add_column(c)
    for r in watch_rows(watch):
        flags = Text(", ".join(FLAG_WORDS.get(x, x) for x in r.flags))
        if any(x in URGENT_FLAGS for x in r.flags):
            flags.stylize("bold reverse")
        if r.what == "breather":
            due = days.due_day(r.due.likely if r.due else None)
            kind = f"breather ({r.kind})"
        else:
            due = (
                (days.short_due(r.due) if narrow else days.due_text(r.due))
                if r.due
                else ("" if r.what == "unit" else r.state)
            )
            kind = r.kind
        if now := act_now(r.flags):
            due = Text(now, style="bold")  # INSPECT NOW / CHANGE NOW
        elif r.overdue:
            due = Text.assemble(("OVERDUE", "bold"), f" {due}")
        dp = pressure(r.dp_ref_bar, prefs, unit=False) if r.what == "filter" else ""
        percent = f"{r.percent_of_limit:.0f} %" if r.percent_of_limit is not None else ""
        if narrow:
            _add_row(table, r.tag, dp, percent, due, flags)
        else:
            read_by = days.when(r.next_reading) if r.next_reading else ""
            _add_row(table, r.tag, r.unit, kind, dp, percent, due, read_by, r.basis, flags)
    return table


def round_table(book: Book, plan: Round) -> Table:
    """The round: one row per filter to read, in walking order."""
    z = book.local_zone()
    title = (
        f"Round, shift {plan.span.name} {plan.span.start.astimezone(z):%d %b %H:%M}–"
        f"{plan.span.end.astimezone(z):%H:%M}: {len(plan.stops)} to read"
    )
    table = LeanTable(title=title, title_justify="left")
    for c in ("#", "unit", "filter", "read", "why", "read by", "% limit"):
        table.add_column(c)
    for i, s in enumerate(plan.stops, 1):
        _add_row(
            table,
            str(i),
            s.unit,
            s.filter,
            " + ".join(s.reads),
            s.why_text,
            f"{s.read_by.astimezone(z):%d %b %H:%M}" if s.read_by else "–",
            f"{s.percent_of_limit:.0f} %" if s.percent_of_limit is not None else "–",
        )
    if not plan.stops:
        _add_row(table, "", "", "nothing to read this shift", "", "", "", "")
    return table


def change_text(change: register.RegisterChange) -> str:
    """'added', or 'old -> new' with '–' for an empty side."""
    if change.field == "*":
        return change.new or "added"
    return f"{change.old if change.old is not None else '–'} → {change.new if change.new is not None else '–'}"


def history_table(book: Book, changes: list[register.RegisterChange], tag: str | None) -> Table:
    title = f"Register history of {tag.upper()}" if tag else "Register history"
    table = LeanTable(title=f"{title} ({len(changes)})", title_justify="left")
    for name in ("time", "by", "record", "field", "change"):
        table.add_column(name, overflow="fold")
    days = LocalDays.of(book)
    for c in changes:
        table.add_row(
            days.when(c.at),
            c.by or "–",
            f"{c.what} {c.tag}",
            "(new record)" if c.field == "*" else c.field,
            change_text(c),
        )
    return table
