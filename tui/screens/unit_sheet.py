"""Unit sheet: one hydraulic unit on a page: filters, breathers, fluid, reservoir, top-ups,
temperatures, the latest sample against its target, and what was logged lately."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Header, Sparkline, Static

from store.entries import Entry, Note
from store.prefs import Prefs
from store.sheets import UnitSheet, unit_sheet

from ..render import describe
from ..widgets import fmt
from ..widgets.banner import DemoBanner
from ..widgets.keystrip import KeyStrip
from .common import ENTRY_BINDINGS, BookScreen, Target

NOTE_CELLS = 30  # a note's text in the recent entries, shortened to fit 80 columns


def shorten(text: str, cells: int) -> str:
    """One line of at most `cells` characters, '…' where it was cut."""
    line = " ".join(text.split())
    return line if len(line) <= cells else line[: cells - 1].rstrip() + "…"


def what_cell(entry: Entry, prefs: Prefs) -> str:
    """What an entry holds, for the recent entries: a note says its text."""
    if isinstance(entry, Note):
        return shorten(entry.note, NOTE_CELLS) or "note"
    return describe(entry, prefs)


class UnitSheetScreen(BookScreen):
    HELP_NAME = "the unit sheet"
    AUTO_FOCUS = "#unit-filters"
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="Back to the list", id="back"),
        *ENTRY_BINDINGS,
    ]

    def __init__(self, tag: str) -> None:
        super().__init__()
        self.tag = tag
        self.sheet: UnitSheet | None = None

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        yield Static(f"UNIT {self.tag}", id="sheet-title", classes="sheet-title", markup=False)
        with VerticalScroll(id="unit-body"):
            yield Static("", id="unit-fluid", markup=False)
            yield Static("", id="unit-sample", markup=False)
            yield Static("Filters (Enter: filter sheet)", classes="section", markup=False)
            yield DataTable(id="unit-filters", cursor_type="row")
            yield Static("Breathers", classes="section", markup=False)
            yield DataTable(id="unit-breathers", cursor_type="row")
            yield Static("Top-ups", classes="section", markup=False)
            yield Static("", id="unit-topups", markup=False)
            yield Sparkline([], id="topup-spark")
            yield Static("Temperatures", classes="section", markup=False)
            yield Static("", id="unit-temps", markup=False)
            yield Sparkline([], id="temp-spark")
            yield Static("Recent entries", classes="section", markup=False)
            yield DataTable(id="unit-entries", cursor_type="row")
        yield KeyStrip()

    def on_mount(self) -> None:
        p = fmt.p_unit(self.sb.prefs)
        self.query_one("#unit-filters", DataTable).add_columns(
            "Tag", "Kind", f"ΔP ref {p}", "Limit", "Due", "Flags"
        )
        self.query_one("#unit-breathers", DataTable).add_columns(
            "Tag", "Kind", "Last swap", "Due", "Basis", "Flags"
        )
        self.query_one("#unit-entries", DataTable).add_columns(
            "Time", "Kind", "Target", "By", "What", "Id"
        )
        self.query_one("#unit-filters").focus()

    def reload(self) -> None:
        tag = self.tag
        self.read_in_thread(lambda b: unit_sheet(b, tag), self.show_sheet, "unit-sheet")

    def action_reload(self) -> None:
        self.reload()

    def action_back(self) -> None:
        self.app.pop_screen()

    def show_sheet(self, sheet: UnitSheet) -> None:
        self.sheet = sheet
        prefs, local = self.sb.prefs, self.sb.book.local_zone()
        u = sheet.unit
        title = (
            f"UNIT {u.tag}"
            + (f" · {u.name}" if u.name else "")
            + (f" · area {u.area}" if u.area else "")
        )
        if sheet.status and sheet.status.flags:
            title += " · " + fmt.flag_text(sheet.status.flags).plain
        self.query_one("#sheet-title", Static).update(title)

        f = sheet.fluid
        fluid = "no fluid registered"
        if f is not None:
            fluid = f"{f.tag} {f.name}".strip()
            if f.iso_vg:
                fluid += f", ISO VG {f.iso_vg}"
            if f.nu40_cst:
                fluid += f", ν40 {f.nu40_cst:g} mm²/s"
            if f.nu100_cst:
                fluid += f", ν100 {f.nu100_cst:g} mm²/s"
        self.query_one("#unit-fluid", Static).update(
            f"Fluid {fluid}\nReservoir {fmt.volume(u.reservoir_l, prefs)} · normal "
            f"{fmt.temperature(u.normal_temp_c, prefs)} · limit "
            f"{fmt.temperature(u.max_temp_c, prefs)} · coldest start "
            f"{fmt.temperature(u.coldest_start_c, prefs)}"
            + (" · hour meter" if u.hour_meter else "")
        )
        sample = "Sample: none logged yet"
        if sheet.sample is not None:
            verdict = {True: "MEETS target", False: "DIRTIER than target", None: ""}[
                sheet.sample_meets
            ]
            sample = f"Sample {fmt.day(sheet.sample.at, local)}: {sheet.sample_text}" + (
                f" · {verdict}" if verdict else ""
            )
        if u.target_code:
            sample += f" · target {u.target_code}"
        self.query_one("#unit-sample", Static).update(sample)

        filters = self.query_one("#unit-filters", DataTable)
        filters.clear()
        for st in sheet.filters:
            overdue = st.state in ("check-now", "past-limit", "past-bypass") or bool(
                st.due and st.due.likely <= sheet.as_of
            )
            filters.add_row(
                Text(st.filter),
                Text(fmt.KIND_SHORT.get(st.kind, st.kind)),
                Text(fmt.pressure(st.dp_ref_bar, prefs)),
                fmt.limit_bar(st.percent_of_limit),
                Text(fmt.due_cell(st.due, st.state, overdue, local)),
                fmt.flag_text(st.flags),
                key=st.filter,
            )
        breathers = self.query_one("#unit-breathers", DataTable)
        breathers.clear()
        for b in sheet.breathers:
            fc = b.forecast
            breathers.add_row(
                Text(b.breather),
                Text(b.kind),
                Text(fmt.day(fc.last_swap, local)),
                Text(("OVERDUE " if fc.overdue else "") + fmt.day(fc.due, local)),
                Text(f"{fc.basis}, {fc.interval_d:.0f} d"),
                fmt.flag_text(b.flags),
                key=b.breather,
            )

        c = sheet.consumption
        weeks = sheet.topup_weeks_l
        total = sum(weeks)
        topups = f"{fmt.volume(total, prefs)} in the last {len(weeks)} weeks"
        if c is not None:
            topups += f" · {c.note}"
            if c.recent_l_per_100h is not None:
                topups += f" · {c.recent_l_per_100h:.2f} L per 100 h"
            if c.rising:
                topups += " · RISING: look for a leak (never by hand)"
        if sheet.topups:
            last = sheet.topups[0]
            how = "unfiltered" if last.filtered_um is None else f"via {last.filtered_um:g} µm"
            topups += (
                f"\nLast: {fmt.day(last.at, local)} {fmt.volume(last.volume_l, prefs)} "
                f"{last.fluid or ''} {how}"
            )
        topups += "\nWeekly, oldest to newest:"
        self.query_one("#unit-topups", Static).update(topups)
        self.query_one("#topup-spark", Sparkline).data = list(weeks)

        temps = sheet.temperatures
        if temps:
            hottest = max(temps, key=lambda r: r.temp_c)
            line = (
                f"Last {fmt.temperature(temps[-1].temp_c, prefs)} on "
                f"{fmt.short_stamp(temps[-1].at, local)} ({temps[-1].filter}) · hottest of "
                f"the last {len(temps)}: {fmt.temperature(hottest.temp_c, prefs)} · limit "
                f"{fmt.temperature(u.max_temp_c, prefs)}"
            )
            if hottest.temp_c > u.max_temp_c:
                line += " · OVER LIMIT"
        else:
            line = "No temperatures logged yet"
        self.query_one("#unit-temps", Static).update(line)
        self.query_one("#temp-spark", Sparkline).data = [r.temp_c for r in temps]

        entries = self.query_one("#unit-entries", DataTable)
        entries.clear()
        for e in sheet.recent:
            style = "strike" if e.voided else ""
            entries.add_row(
                Text(fmt.short_stamp(e.at, local), style=style),
                Text(e.kind + (" VOID" if e.voided else ""), style=style),
                Text(e.target or e.unit or "", style=style),
                Text(e.by, style=style),
                Text(what_cell(e, prefs), style=style),
                Text(e.id[:8], style=style),
                key=e.id,
            )
        self.loaded = True

    # ---- the cursor's target ----

    def target(self) -> Target | None:
        if self.sheet is None:
            return None
        focused = self.focused
        unit = self.sheet.unit.tag
        if isinstance(focused, DataTable) and focused.row_count:
            key = focused.coordinate_to_cell_key(focused.cursor_coordinate).row_key.value
            if focused.id == "unit-filters":
                return Target("filter", str(key), unit)
            if focused.id == "unit-breathers":
                return Target("breather", str(key), unit)
        return Target("unit", unit, unit)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table.id == "unit-filters":
            self.sb.open_sheet("filter", str(event.row_key.value), self.tag)
