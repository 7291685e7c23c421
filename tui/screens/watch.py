"""Watch: every filter, breather and flagged unit in the book, most urgent first."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from datetime import tzinfo

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.coordinate import Coordinate
from textual.widgets import DataTable, Header, Input, Select

from store import Book, record, views
from store.base.prefs import Prefs
from store.base.text import inert
from store.base.timeutil import shift_at
from store.health.urgency import act_now
from store.ledger.register import Unit, list_all
from store.sheets import Summary, WatchRow, row_matches, summarise, watch_rows
from tui.base.keys import bind
from tui.screens.common import ENTRY_BINDINGS, BookScreen, Target
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import Cell, RowTable
from tui.widgets.wrapped import Wrapped

ALL = "*"
CATCH_UP = "watch-catch-up"  # the read group of the catch-up behind the list


@dataclass(frozen=True)
class WatchData:
    rows: list[WatchRow]
    summary: Summary
    as_of_text: str
    shift_text: str
    areas: list[tuple[str, str]]  # Select options
    stale: int  # rows shown as kept that are marked stale (or missing, or of an old format)


def read_watch(book: Book, fresh: bool = False) -> WatchData:
    """The list: the kept rows that hold, the rest computed in memory (what moves with the
    clock worked out now). Unless `fresh`, the rows that did not hold are counted, for
    `catch_up` to keep behind."""
    w = views.watch(book)
    rows = watch_rows(w)
    local = book.local_zone()
    span = shift_at(w.as_of, book.shift_pattern(), local)
    units = list_all(book, Unit)
    areas = sorted({u.area for u in units if u.area})
    options = [(f"area {a}", f"area:{a}") for a in areas]
    options += [
        (f"unit {u.tag}" + (f" {u.name}" if u.name else ""), f"unit:{u.tag}") for u in units
    ]
    return WatchData(
        rows=rows,
        summary=summarise(rows, w.as_of, span.end),
        as_of_text=f"{w.as_of.astimezone(local):%H:%M}",  # the list is read anew each day
        shift_text=f"{span.name} to {span.end.astimezone(local):%H:%M}",
        areas=options,
        stale=0 if fresh else len(w.recomputed),
    )


def catch_up(book: Book) -> WatchData:
    """The app's explicit refresh: recompute the stale rows (each kept as it is done, where
    the book can be written), then the list with nothing stale."""
    record.refresh_stale(book)
    return read_watch(book, fresh=True)


def watch_columns(prefs: Prefs) -> list[tuple[str, str]]:
    """The list's columns, most important first: those that do not fit the width give way
    (the line under the list repeats the flags, unit, kind and basis)."""
    return [
        ("Tag", "tag"),
        ("Due", "due"),
        ("Limit", "limit"),
        (f"ΔP ref {fmt.p_unit(prefs)}", "dp"),
        ("Flags", "flags"),
        ("Trend", "trend"),
        ("Unit", "unit"),
        ("Kind", "kind"),
        ("Basis", "basis"),
    ]


def row_cells_of(
    r: WatchRow, prefs: Prefs, local: tzinfo, once: Callable[[object, Callable[[], Text]], Text]
) -> tuple[Text, ...]:
    """One row's cells, in the order of `watch_columns` (`once`: a cell shared by the rows
    of one text)."""
    urgent = "bold" if r.tier <= 1 else ""
    due = fmt.due_cell(r.due, r.state, r.overdue, local)
    if r.what == "filter" and not r.gauge and r.due is None and not r.overdue:
        due = "by indicator"
    if now := act_now(r.flags):
        due = now  # INSPECT NOW / CHANGE NOW
    kind = r.kind if r.what != "breather" else "breather"
    return (  # Cell: a Text as the table holds it (built so, not copied into one)
        fmt.shown(Cell(r.tag, style=urgent)),
        fmt.shown(Cell(due, style=urgent)),
        fmt.shown(fmt.limit_bar(r.percent_of_limit)),
        fmt.shown(
            Cell(fmt.pressure(r.dp_ref_bar, prefs, unit=False) if r.what == "filter" else "")
        ),
        once(("flags", *r.flags), lambda r=r: fmt.flag_text(r.flags)),
        fmt.shown(Cell(fmt.sparkline(r.trend_bar, r.limit_bar))),
        once(("unit", r.unit), lambda r=r: Cell(r.unit)),
        once(("kind", kind), lambda kind=kind: Cell(kind)),
        once(("basis", r.basis), lambda r=r: Cell(r.basis)),
    )


class WatchScreen(BookScreen):
    HELP_NAME = "the watch list"
    AUTO_FOCUS = "#watch-table"
    BINDINGS = [
        *ENTRY_BINDINGS,
        bind("u", "unit_sheet", "unit-sheet"),
        bind("slash", "find", "find"),
        bind("a", "area", "area"),
        bind("f5", "reload", "recompute"),
    ]

    def __init__(self) -> None:
        super().__init__(id="watch")
        self.data: WatchData | None = None
        self.shown: list[WatchRow] = []
        self.catching_up = False  # stale rows are being recomputed behind the list
        # each row's cells by its tag, with the row they were made from, and what else
        # they were made from (`fill`)
        self.row_cells: dict[str, tuple[WatchRow, tuple[Text, ...]]] = {}
        self.cells_made_for: tuple = ()

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        with Horizontal(id="watch-bar"):
            yield Select(
                [("all units", ALL)],
                value=ALL,
                allow_blank=False,
                compact=True,
                id="area",
            )
            yield Input(placeholder="/ find: tag, unit, flag…", compact=True, id="find")
        yield Wrapped("reading the book…", id="summary")
        table = RowTable(id="watch-table", zebra_stripes=True, flexible="flags")
        yield table
        yield Wrapped(id="detail", max_lines=3)  # the sheet (Enter) has every note
        yield KeyStrip()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        # The line under the list follows the cursor as it moves, in the same turn of the
        # event loop: from DataTable's RowHighlighted message it came a turn later, and the
        # screen was drawn twice for every key (once for the table, once for the line).
        self.watch(table, "cursor_coordinate", self.cursor_moved, init=False)
        table.loading = True
        self.query_one("#find", Input).cursor_blink = self.sb.cursor_blink
        table.focus()

    # ---- loading ----

    def reload(self) -> None:
        # A catch-up under way read the list before this read: its list is not shown (it
        # goes on keeping rows in its thread), and this read's list starts one if needed.
        self.drop_reads(CATCH_UP)
        self.catching_up = False
        self.query_one("#summary", Wrapped).show("recomputing…")
        early, self.sb.early_watch = self.sb.early_watch, None
        self.read_in_thread(read_watch, self.show_data, "watch", early=early)

    def action_reload(self) -> None:
        self.reload()

    def show_data(self, data: WatchData) -> None:
        self.data = data
        self.sb.remember_rows(data.rows)
        area = self.query_one("#area", Select)
        current = area.value
        with self.prevent(Select.Changed):
            area.set_options([("all units", ALL), *data.areas])
            values = [v for _, v in data.areas]
            area.value = current if current in values else ALL
        self.fill()
        self.query_one(DataTable).loading = False
        if not self.loaded:  # what runs behind the list starts once it is on the screen
            self.call_after_refresh(self.sb.first_paint_done)
        self.loaded = True
        if data.stale and not self.catching_up:
            self.catching_up = True
            self.read_in_thread(catch_up, self.caught_up, CATCH_UP)

    def caught_up(self, data: WatchData) -> None:
        self.show_data(data)
        self.catching_up = False

    def failed(self, exc: BaseException) -> None:
        if not self.loaded:
            self.sb.first_paint_done()  # the check behind it says more than the failed read
        self.catching_up = False
        super().failed(exc)

    # ---- the table ----

    def visible(self) -> list[WatchRow]:
        if self.data is None:
            return []
        choice = self.query_one("#area", Select).value
        text = self.query_one("#find", Input).value
        rows = self.data.rows
        if isinstance(choice, str) and choice.startswith("area:"):
            rows = [r for r in rows if r.area == choice[5:]]
        elif isinstance(choice, str) and choice.startswith("unit:"):
            rows = [r for r in rows if r.unit == choice[5:]]
        if text.strip():
            rows = [r for r in rows if row_matches(r, text)]
        return rows

    def fill(self) -> None:
        table = self.query_one(RowTable)
        prefs, local = self.sb.prefs, self.sb.book.local_zone()
        self.shown = self.visible()
        # A row's cells are made from the row, the units of measure, the zone and this year
        # (a due day of another year shows its year): a row read again alike keeps the cells
        # made for it (a save changes a row or two of the list).
        made_for = (prefs, local, fmt.clock().astimezone(local).year)
        if made_for != self.cells_made_for:
            self.cells_made_for, self.row_cells = made_for, {}
        row_cells = self.row_cells
        rows = []
        # One cell for each distinct text of the columns that repeat (a unit's tag, a kind,
        # a basis, a set of flags): a table holds its cells as they are, never changes one.
        repeated: dict[object, Text] = {}

        def once(key: object, make: Callable[[], Text]) -> Text:
            found = repeated.get(key)
            if found is None:
                found = repeated[key] = fmt.shown(make())
            return found

        for r in self.shown:
            made = row_cells.get(r.tag)
            if made is None or made[0] != r:
                made = row_cells[r.tag] = (r, row_cells_of(r, prefs, local, once))
            rows.append((r.tag, made[1]))
        table.show(watch_columns(prefs), rows)  # the cursor stays on its row's tag
        self.show_summary()
        self.show_detail()

    def show_summary(self) -> None:
        data = self.data
        if data is None:
            return
        s = data.summary
        phrases: list[str | Text] = []
        for count, word, loud in (
            (s.overdue, "overdue", True),
            (s.due_this_shift, "due this shift", True),
            (s.due_this_week, "in 7 days", False),
            (s.urgent, "urgent", True),
        ):
            phrases.append(
                Text(f"{count} {word}", style="bold reverse" if count and loud else "bold")
            )
        if len(self.shown) != len(data.rows):
            phrases.append(f"{len(self.shown)} of {len(data.rows)} shown")
        phrases.append(f"{data.as_of_text}, {data.shift_text}")
        if data.stale:
            phrases.append(Text(f"updating {data.stale} rows…", style="italic"))
        self.query_one("#summary", Wrapped).show(phrases)

    def current(self) -> WatchRow | None:
        table = self.query_one(DataTable)
        if not self.shown or table.cursor_row is None or table.cursor_row >= len(self.shown):
            return None
        return self.shown[table.cursor_row]

    def current_tag(self) -> str | None:
        row = self.current()
        return row.tag if row else None

    def cursor_moved(self, old: Coordinate, new: Coordinate) -> None:
        # DataTable sets its cursor again (to the same place) for every row it adds
        if new.row != old.row:
            self.show_detail()

    def show_detail(self) -> None:
        row = self.current()
        detail = self.query_one("#detail", Wrapped)
        if row is None:
            detail.show(("Nothing to show", "t: type or scan a tag", "3: register", "?: help"))
            return
        local = self.sb.book.local_zone()
        kind = row.kind if row.what == "filter" else ""
        head: list[str] = [row.tag, fmt.flag_text(row.flags).plain if row.flags else ""]
        head.append(f"{kind} {row.what} on {row.unit}".strip())
        if now := act_now(row.flags):
            head.append(now)  # not "change due …": the element may be gone
        elif row.due is not None:
            word = "change" if row.what == "filter" else "swap"
            head.append(f"{word} due {fmt.due_text(row.due, local)}")
        if row.next_reading is not None:
            head.append(fmt.read_again_text(row.next_reading, "", local))
        if row.basis:
            head.append(f"basis {row.basis}")
        prefs = self.sb.prefs
        notes = [fmt.in_units(n, prefs) for n in row.notes] or [
            fmt.STATE_WORDS.get(row.state, row.state)
        ]
        detail.show([inert(h) for h in head], [inert(n) for n in notes])

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        row = self.current()
        if row is not None:
            self.sb.open_sheet(row.what, row.tag, row.unit)

    # ---- filters ----

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "find":
            self.fill()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id == "find":
            self.query_one(DataTable).focus()

    def on_select_changed(self, event: Select.Changed) -> None:
        if event.select.id == "area":
            self.fill()

    def key_escape(self) -> None:
        find = self.query_one("#find", Input)
        if find.has_focus and find.value:
            find.value = ""
        self.query_one(DataTable).focus()

    def action_find(self) -> None:
        self.query_one("#find", Input).focus()

    def action_area(self) -> None:
        area = self.query_one("#area", Select)
        area.focus()
        area.action_show_overlay()

    # ---- actions on the row ----

    def target(self) -> Target | None:
        row = self.current()
        return Target(row.what, row.tag, row.unit) if row else None

    def action_unit_sheet(self) -> None:
        row = self.current()
        if row is not None:
            self.sb.open_sheet("unit", row.unit, row.unit)
