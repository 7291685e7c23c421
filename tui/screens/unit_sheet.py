"""Unit sheet: one hydraulic unit on a page: filters, breathers, fluid, reservoir, top-ups,
temperatures, the latest sample against its target, and what was logged lately."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Header, Sparkline, Static

from store.base.prefs import Prefs
from store.ledger.entries import Entry, Note
from store.sheets import UnitSheet, unit_sheet
from tui.base.keys import bind
from tui.base.render import describe
from tui.screens.common import ENTRY_BINDINGS, BookScreen, Target
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import ENTRY_COLUMNS, RowTable
from tui.widgets.wrapped import Wrapped

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


def sample_line(sheet: UnitSheet, day: str) -> str:
    """'Sample 19 Nov: 16/14/11 · meets target 17/15/12 · water 115 ppm'."""
    sample, target = sheet.sample, sheet.unit.target_code
    assert sample is not None
    line = f"Sample {day}: {sample.code or 'no particle code'}"
    if sheet.sample_meets is True:
        line += f" · meets target {target}"
    elif sheet.sample_meets is False:
        line += f" · DIRTIER than target: {sheet.sample_text.split(';')[0]}"
    elif target:
        line += f" · target {target}"
    if sample.water_ppm is not None:
        line += f" · water {sample.water_ppm:g} ppm"
    return line


class UnitSheetScreen(BookScreen):
    HELP_NAME = "the unit sheet"
    AUTO_FOCUS = "#unit-filters"
    BINDINGS = [
        bind("escape", "back", "back"),
        *ENTRY_BINDINGS,
    ]

    def __init__(self, tag: str) -> None:
        super().__init__()
        self.tag = tag
        self.sheet: UnitSheet | None = None

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        yield Wrapped(f"UNIT {self.tag}", id="sheet-title", classes="sheet-title")
        with VerticalScroll(id="unit-body"):
            yield Wrapped(id="unit-fluid")
            yield Wrapped(id="unit-sample")
            yield Static("Filters (Enter: filter sheet)", classes="section", markup=False)
            yield RowTable(id="unit-filters")
            yield Static("Breathers", classes="section", markup=False)
            yield RowTable(id="unit-breathers")
            yield Static("Top-ups", classes="section", markup=False)
            yield Wrapped(id="unit-topups")
            yield Sparkline([], id="topup-spark")
            yield Static("Temperatures", classes="section", markup=False)
            yield Wrapped(id="unit-temps")
            yield Sparkline([], id="temp-spark")
            yield Static("Recent entries", classes="section", markup=False)
            yield RowTable(id="unit-entries", flexible="what")
        yield KeyStrip()

    def on_mount(self) -> None:
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
        self.query_one("#sheet-title", Wrapped).show_text(title)

        f = sheet.fluid
        fluid = "no fluid registered"
        if f is not None:
            fluid = f"{f.tag} {f.name}".strip()
            if f.iso_vg and f"ISO VG {f.iso_vg}" not in fluid:
                fluid += f", ISO VG {f.iso_vg}"
            if f.nu40_cst:
                fluid += f", ν40 {f.nu40_cst:g} mm²/s"
            if f.nu100_cst:
                fluid += f", ν100 {f.nu100_cst:g} mm²/s"
        self.query_one("#unit-fluid", Wrapped).show_text(
            f"Fluid {fluid}\nReservoir {fmt.volume(u.reservoir_l, prefs)} · normal "
            f"{fmt.temperature(u.normal_temp_c, prefs)} · limit "
            f"{fmt.temperature(u.max_temp_c, prefs)} · coldest start "
            f"{fmt.temperature(u.coldest_start_c, prefs)}"
            + (" · hour meter" if u.hour_meter else "")
        )
        sample = "Sample: none logged yet" + (f" · target {u.target_code}" if u.target_code else "")
        if sheet.sample is not None:
            sample = sample_line(sheet, fmt.day(sheet.sample.at, local))
        self.query_one("#unit-sample", Wrapped).show_text(sample)

        rows = []
        for st in sheet.filters:
            overdue = st.state in ("check-now", "past-limit", "past-bypass") or bool(
                st.due and st.due.likely <= sheet.as_of
            )
            cells = (
                Text(st.filter),
                Text(fmt.due_cell(st.due, st.state, overdue, local)),
                fmt.flag_text(st.flags),
                fmt.limit_bar(st.percent_of_limit),
                Text(fmt.pressure(st.dp_ref_bar, prefs, unit=False)),
                Text(st.kind),
            )
            rows.append((st.filter, cells))
        self.query_one("#unit-filters", RowTable).show(
            [
                ("Tag", "tag"),
                ("Due", "due"),
                ("Flags", "flags"),
                ("Limit", "limit"),
                (f"ΔP ref {fmt.p_unit(prefs)}", "dp"),
                ("Kind", "kind"),
            ],
            rows,
        )
        rows = []
        for b in sheet.breathers:
            fc = b.forecast
            cells = (
                Text(b.breather),
                Text(("OVERDUE " if fc.overdue else "") + fmt.day(fc.due, local)),
                fmt.flag_text(b.flags),
                Text(fmt.day(fc.last_swap, local)),
                Text(f"{fc.basis}, {fc.interval_d:.0f} d"),
                Text(b.kind),
            )
            rows.append((b.breather, cells))
        self.query_one("#unit-breathers", RowTable).show(
            [
                ("Tag", "tag"),
                ("Due", "due"),
                ("Flags", "flags"),
                ("Last swap", "last"),
                ("Basis", "basis"),
                ("Kind", "kind"),
            ],
            rows,
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
        self.query_one("#unit-topups", Wrapped).show_text(topups)
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
        self.query_one("#unit-temps", Wrapped).show_text(line)
        self.query_one("#temp-spark", Sparkline).data = [r.temp_c for r in temps]

        rows = []
        for e in sheet.recent:
            style = "strike" if e.voided else ""
            what = what_cell(e, prefs)
            cells = (
                Text(fmt.short_stamp(e.at, local), style=style),
                Text(e.kind + (" VOIDED" if e.voided else ""), style=style),
                Text(e.target or e.unit or "", style=style),
                Text(e.by, style=style),
                Text(e.id[:8], style=style),
                Text(what, style=style),
            )
            rows.append((e.id, cells))
        self.query_one("#unit-entries", RowTable).show(ENTRY_COLUMNS, rows)
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
