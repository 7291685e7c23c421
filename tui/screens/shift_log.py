"""Shift log: what was logged in a shift (voided entries struck through and marked), the
handover for the next shift, and the export to CSV in the same format as `sumpbook export`."""

from __future__ import annotations

from pathlib import Path

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Header, Static

from store import open_book
from store.base.prefs import Prefs
from store.base.session import Clock
from store.base.timeutil import ShiftSpan, next_shift, previous_shift, shift_at, shift_named
from store.exchange.csvexport import export_file as write_file
from store.sheets import ShiftLog, kind_counts, shift_log
from tui.base.keys import bind
from tui.base.render import describe
from tui.base.workers import guarded
from tui.screens.ask import AskScreen
from tui.screens.common import BookScreen, Target
from tui.screens.file_prompt import FilePrompt
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import ENTRY_COLUMNS, RowTable


def export_file(path: str, dest: Path, span: ShiftSpan, prefs: Prefs, clock: Clock) -> int:
    """Write one shift's entries as CSV, the status rows of its handover after them (runs in a
    worker thread on its own connection)."""
    with open_book(path, create=False, clock=clock) as book:
        local, pattern = book.local_zone(), book.shift_pattern()
        return write_file(book, dest, span.start, span.end, prefs, local, pattern, status=True)


class ShiftLogScreen(BookScreen):
    HELP_NAME = "the shift log"
    AUTO_FOCUS = "#shift-entries"
    BINDINGS = [
        bind("left_square_bracket", "step(-1)", "shift-earlier"),
        bind("right_square_bracket", "step(1)", "shift-later"),
        bind("full_stop", "current", "shift-current"),
        bind("g", "go_to", "shift-go"),
        bind("x", "export", "shift-export"),
        bind("v", "void", "shift-void"),
        bind("n", "entry('note')", "log-note"),
    ]

    def __init__(self) -> None:
        super().__init__(id="shift")
        self.span: ShiftSpan | None = None
        self.shift: ShiftLog | None = None
        self.exporting = False

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        yield Static("SHIFT", id="sheet-title", classes="sheet-title", markup=False)
        yield RowTable(id="shift-entries", zebra_stripes=True, flexible="what")
        with VerticalScroll(id="handover-box"):
            yield Static("", id="handover", markup=False)
        yield KeyStrip()

    def on_mount(self) -> None:
        self.query_one(DataTable).focus()

    def current_span(self) -> ShiftSpan:
        book = self.sb.book
        return shift_at(book.now(), book.shift_pattern(), book.local_zone())

    @guarded
    def reload(self) -> None:
        if self.span is None:
            self.span = self.current_span()
        span = self.span
        self.read_in_thread(lambda b: shift_log(b, span), self.show_log, "shift-log")

    def action_reload(self) -> None:
        self.reload()

    @guarded
    def action_step(self, step: int) -> None:
        book = self.sb.book
        pattern, local = book.shift_pattern(), book.local_zone()
        span = self.span or self.current_span()
        self.span = (next_shift if step > 0 else previous_shift)(span, pattern, local)
        self.reload()

    @guarded
    def action_current(self) -> None:
        self.span = self.current_span()
        self.reload()

    @guarded
    def action_go_to(self) -> None:
        book = self.sb.book
        span = self.span or self.current_span()

        def accept(label: str) -> str | None:
            self.span = shift_named(label, book.shift_pattern(), book.local_zone())
            return None

        self.app.push_screen(
            AskScreen(
                "Go to shift (YYYY-MM-DD/NAME):", span.label, accept, blink=self.sb.cursor_blink
            ),
            lambda answer: self.reload() if answer else None,
        )

    def show_log(self, log: ShiftLog) -> None:
        self.shift = log
        prefs, local = self.sb.prefs, self.sb.book.local_zone()
        span = log.span
        voided = sum(1 for e in log.entries if e.voided)
        now_span = self.current_span()
        when = (
            "this shift" if span == now_span else ("later" if span.start > now_span.start else "")
        )
        self.query_one("#sheet-title", Static).update(
            f"SHIFT {span.label} · {span.start.astimezone(local):%a %H:%M}–"
            f"{span.end.astimezone(local):%H:%M}"
            + (f" ({when})" if when else "")
            + f" · {len(log.entries)} entries"
            + (f", {voided} voided" if voided else "")
        )
        rows = []
        for e in log.entries:
            style = "strike dim" if e.voided else ""
            kind = e.kind + (" VOIDED" if e.voided else "")  # the CSV's kind names
            cells = (
                Text(fmt.stamp(e.at, local)[11:], style=style),
                Text(kind, style=style),
                Text(e.target or e.unit or "", style=style),
                Text(e.by, style=style),
                Text(e.id[:8], style=style),
                Text(describe(e, prefs) + (f" · {e.note}" if e.note else ""), style=style),
            )
            rows.append((e.id, tuple(fmt.shown(c) for c in cells)))
        self.query_one(RowTable).show(ENTRY_COLUMNS, rows)
        self.query_one("#handover", Static).update(fmt.shown(self.handover_text(log)))
        self.loaded = True

    def handover_text(self, log: ShiftLog) -> Text:
        local = self.sb.book.local_zone()
        text = Text()
        text.append("HANDOVER\n", style="bold")
        counts = kind_counts(log.done)
        if counts:
            done = ", ".join(f"{n} × {k}" for k, n in counts.items())
            text.append(f"Done: {done}\n")
            for e in log.done:
                if e.kind in ("change", "topup", "breather", "sample"):
                    text.append(f"  {e.target or e.unit}: {describe(e, self.sb.prefs)}\n")
        else:
            text.append("Done: nothing logged\n")
        if log.logged_late:
            text.append("Logged this shift, dated earlier:\n", style="bold")
            for e in log.logged_late:
                when = fmt.stamp(e.at, local)
                text.append(
                    f"  {e.target or e.unit or ''}: {describe(e, self.sb.prefs)} "
                    f"(dated {when}, by {e.by})\n"
                )
        nxt = log.next_span
        text.append(
            f"Due by the end of the next shift ({nxt.name}, to "
            f"{nxt.end.astimezone(local):%a %H:%M}): "
        )
        if log.due_next:
            text.append("\n")
            for r in log.due_next:
                word = "change" if r.what == "filter" else "swap"
                text.append(f"  {r.tag} {word} {fmt.due_cell(r.due, r.state, r.overdue, local)}\n")
        else:
            text.append("nothing\n")
        text.append("Open flags: ")
        if log.open_flags:
            text.append("\n")
            for r in log.open_flags:
                text.append(f"  {r.tag}: ")
                text.append_text(fmt.flag_text(r.flags))
                text.append("\n")
        else:
            text.append("none\n")
        return text

    # ---- entry ids ----

    def selected_id(self) -> str | None:
        table = self.query_one(DataTable)
        if not table.row_count:
            return None
        return str(table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value)

    def target(self) -> Target | None:
        if self.shift is None:
            return None
        entry_id = self.selected_id()
        for e in self.shift.entries:
            if e.id == entry_id and e.unit:
                return Target("unit", e.unit, e.unit)
        return None

    def action_void(self) -> None:
        self.sb.open_form("void", self.void_candidate())

    def void_candidate(self) -> str:
        """The entry `v` offers to void: the highlighted one if the signed-in technician logged
        it, else their own newest in this shift, else none. A colleague's entry is never
        offered: two keys must not void what someone else logged (issue 23); its id can
        still be typed, and the form asks before saving either way."""
        me = self.sb.prefs.tech.upper()
        if self.shift is None or not me:
            return ""
        mine = [e for e in self.shift.entries if e.by.upper() == me and not e.voided]
        mine = [e for e in mine if e.kind != "void"]
        chosen = self.selected_id()
        for e in mine:
            if e.id == chosen:
                return e.id
        return max(mine, key=lambda e: e.at).id if mine else ""

    # ---- export ----

    def default_export(self) -> Path:
        span = self.span or self.current_span()
        return Path.cwd() / f"shiftlog-{span.day.isoformat()}-{span.name}.csv"

    @guarded
    def action_export(self) -> None:
        if self.exporting:
            self.notify("An export is running already.")
            return
        self.app.push_screen(
            FilePrompt("Export this shift as CSV to:", self.default_export(), self.sb.cursor_blink),
            self.export_to,
        )

    def export_to(self, dest: Path | None) -> None:
        if dest is None:
            return
        span = self.span or self.current_span()
        prefs = self.sb.prefs
        path, clock = str(self.sb.book.path), self.sb.book.clock
        self.exporting = True
        self.query_one(DataTable).loading = True

        def job() -> None:
            try:
                count = export_file(path, dest, span, prefs, clock)
            except Exception as exc:  # noqa: BLE001 - shown to the user
                self.app.call_from_thread(self.export_done, dest, None, exc)
                return
            self.app.call_from_thread(self.export_done, dest, count, None)

        self.run_worker(job, thread=True, group="export", exit_on_error=False)

    def export_done(self, dest: Path, count: int | None, exc: BaseException | None) -> None:
        self.exporting = False
        self.query_one(DataTable).loading = False
        if exc is not None:
            self.notify(f"Export failed: {exc}", severity="error", timeout=8)
        else:
            self.notify(
                f"{count} {'entry' if count == 1 else 'entries'} written to {dest}", timeout=6
            )
