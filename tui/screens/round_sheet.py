"""The round: the filters to read this shift in walking order, read one after another.

The cursor stands on the stop to read; the value goes in the line below the list and Enter
saves it and moves on to the next stop not yet done. ctrl+o records a skip with its reason (a note
on the unit, store/rounds.py `skip_note`). A reading that says the bypass is open asks first,
with the caution, as the reading form does.
"""

from __future__ import annotations

import sqlite3

from rich.text import Text
from textual.actions import SkipAction
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.widgets import DataTable, Header, Input, Static

from store import record
from store.base.errors import BookError
from store.ledger import entry_input
from store.ledger.entries import Reading
from store.ledger.journal import BYPASS_OPEN, BYPASS_STEPS, bypass_head
from store.ledger.register import FilterPosition, find
from store.rounds import SKIP_REASONS, Round, Stop, plan_round, skip_note
from tui.base.keys import bind
from tui.base.workers import guarded, write_behind
from tui.forms.base import FIELD_KEYS, write_problem
from tui.forms.confirm import ConfirmScreen
from tui.screens.ask import AskScreen
from tui.screens.common import BookScreen, Target
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.field import FieldInput
from tui.widgets.inorder import read_at_key
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import RowTable

COLUMNS = [
    ("#", "n"),
    ("Filter", "filter"),
    ("Unit", "unit"),
    ("Done", "done"),
    ("Why", "why"),
    ("Read", "read"),
]


class RoundScreen(BookScreen):
    HELP_NAME = "the round"
    AUTO_FOCUS = "#round-value"
    BINDINGS = [
        bind("ctrl+o", "skip", "round-skip"),
        bind("ctrl+n", "following", "round-next"),
        # digits go into the fields here, so `1` cannot lead back: Esc does
        bind("escape", "app.go('watch')", "round-leave"),
        bind("f5", "recompute", "recompute"),
        # Seen the moment they arrive, in the order typed (tui/widgets/inorder.py): the stop
        # and the values a save takes are the ones shown at its key.
        bind("up", "move(-1)", "round-up", show=False, priority=True),
        bind("down", "move(1)", "round-down", show=False, priority=True),
        Binding("enter", "save", show=False, priority=True),
        *FIELD_KEYS,
    ]
    FIELDS = ("value", "temp", "hours")

    def __init__(self) -> None:
        super().__init__(id="round")
        self.plan: Round | None = None
        self.done: dict[str, str] = {}  # upper-case tag -> what was saved (or "skipped: ...")
        self.following = False
        self.saving = False  # a save is on its way: Enter meanwhile is not a second one
        self.enter_refused = False  # ... and one was typed: said once the save is done

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        yield Static("ROUND", id="sheet-title", classes="sheet-title", markup=False)
        yield RowTable(id="round-stops", zebra_stripes=True, flexible="why")
        yield Static("", id="round-what", markup=False)
        with Horizontal(id="round-entry"):
            yield FieldInput(id="round-value", compact=True)
            yield FieldInput(id="round-temp", compact=True)
            yield FieldInput(id="round-hours", compact=True)
        yield Static("", id="round-msg", classes="form-msg", markup=False)
        yield KeyStrip()

    def on_mount(self) -> None:
        for inp in self.query(Input):
            inp.cursor_blink = self.sb.cursor_blink

    # ---- reading the round ----

    @guarded
    def reload(self) -> None:
        if self.plan is not None:
            return  # the round stays as it was planned; f5 plans it again
        self.read_plan()

    def read_plan(self) -> None:
        following = self.following
        self.read_in_thread(lambda b: plan_round(b, following=following), self.show_plan, "round")

    def action_recompute(self) -> None:
        self.plan = None
        self.done = {}
        self.read_plan()

    def action_following(self) -> None:
        self.following = not self.following
        self.action_recompute()

    def show_plan(self, plan: Round) -> None:
        self.plan = plan
        self.show_rows()
        self.go_to(self.next_open(0))
        self.loaded = True

    def show_rows(self) -> None:
        plan = self.plan
        if plan is None:
            return
        local = self.sb.book.local_zone()
        done = sum(1 for s in plan.stops if s.filter.upper() in self.done)
        span = plan.span
        self.query_one("#sheet-title", Static).update(
            f"ROUND {span.name} {span.start.astimezone(local):%a %d %b %H:%M}–"
            f"{span.end.astimezone(local):%H:%M}"
            + (" (next shift)" if self.following else "")
            + f" · {done} of {len(plan.stops)} done"
        )
        rows = []
        for i, s in enumerate(plan.stops, 1):
            cells = (str(i), s.filter, s.unit, self.done.get(s.filter.upper(), ""),
                     s.why_text, " + ".join(s.reads))  # fmt: skip
            rows.append((s.filter, tuple(fmt.shown(Text(c)) for c in cells)))
        self.query_one(RowTable).show(COLUMNS, rows)
        if not plan.stops:
            self.query_one("#round-what", Static).update("Nothing to read this shift.")

    # ---- where the cursor is ----

    def stop(self) -> Stop | None:
        table = self.query_one(RowTable)
        if self.plan is None or not self.plan.stops or not table.row_count:
            return None
        return self.plan.stops[min(table.cursor_row, len(self.plan.stops) - 1)]

    def target(self) -> Target | None:
        s = self.stop()
        return Target("filter", s.filter, s.unit) if s else None

    def next_open(self, start: int) -> int | None:
        stops = self.plan.stops if self.plan else ()
        for i in [*range(start, len(stops)), *range(0, start)]:
            if stops[i].filter.upper() not in self.done:
                return i
        return None

    def go_to(self, index: int | None) -> None:
        table = self.query_one(RowTable)
        if index is not None and table.row_count:
            table.move_cursor(row=index)
        self.show_stop()

    def action_move(self, step: int) -> None:
        table = self.query_one(RowTable)
        if table.row_count:
            table.move_cursor(row=max(0, min(table.row_count - 1, table.cursor_row + step)))
        self.show_stop()

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self.show_stop()

    def show_stop(self) -> None:
        s = self.stop()
        what = self.query_one("#round-what", Static)
        value, temp, hours = (self.query_one(f"#round-{n}", Input)
                              for n in ("value", "temp", "hours"))  # fmt: skip
        if s is None:
            return
        prefs = self.sb.prefs
        local = self.sb.book.local_zone()
        last = f" · last {s.last_reading.astimezone(local):%d %b %H:%M}" if s.last_reading else ""
        what.update(f"{s.filter} on {s.unit} · read {' + '.join(s.reads)}{last}")
        value.placeholder = (
            f"ΔP {fmt.p_unit(prefs)}" if s.gauge else "indicator: clean/dirty/bypass"
        )
        temp.placeholder = f"temp {fmt.t_unit(prefs)}"
        hours.placeholder = "hour meter h" if "hour meter" in s.reads else "(no hour meter)"
        hours.disabled = "hour meter" not in s.reads
        value.focus()

    # ---- saving ----

    def say(self, text: str, bad: bool = False) -> None:
        msg = self.query_one("#round-msg", Static)
        msg.update(text)
        msg.set_class(bad, "-bad")

    def action_save(self) -> None:
        """Enter in a value field: the stop and the values as they stood at the key. Each
        field is emptied as it is read, so what is typed after the Enter is the next stop's;
        a refused value is put back."""
        focused = self.focused
        if not isinstance(focused, Input) or focused.id not in {f"round-{n}" for n in self.FIELDS}:
            raise SkipAction()
        s = self.stop()
        if s is None:
            return
        if self.saving:
            self.enter_refused = True
            self.say("Saving… this Enter was not taken: press Enter again once saved.", bad=True)
            return
        self.saving = True
        fields = {self.query_one(f"#round-{n}", Input): n for n in self.FIELDS}

        def take(field: Input) -> str:
            text = field.value.strip()
            field.value = ""
            return text

        def read(values: dict) -> None:
            if self.is_attached:
                self.save_typed(s, {fields[f]: v for f, v in values.items()})

        read_at_key(fields, take, read)

    def put_back(self, typed: dict[str, str]) -> None:
        """A refused reading's text, back where it was typed (unless typed over since)."""
        for name, text in typed.items():
            field = self.query_one(f"#round-{name}", Input)
            if not field.value:
                field.value = text

    def refuse(self, typed: dict[str, str], problem: str) -> None:
        self.saving = False
        self.put_back(typed)
        self.say("Not saved: " + problem, bad=True)

    def reading_of(self, s: Stop, typed: dict[str, str]) -> Reading:
        """The reading typed in for a stop, by the one entry builder
        (store/ledger/entry_input.py); BookError with a plain line when it cannot be."""
        text = typed["value"]
        if not text:
            raise BookError(
                "type the ΔP" if s.gauge else "type the indicator: clean, dirty or bypass"
            )
        fields = {
            "filter": s.filter,
            "dp" if s.gauge else "indicator": text,
            "temp": typed["temp"],
            "hours": typed["hours"],
        }
        entry = entry_input.build("reading", fields, self.sb.prefs, by=self.sb.tech)
        assert isinstance(entry, Reading)
        return entry

    def save_typed(self, s: Stop, typed: dict[str, str]) -> None:
        try:
            entry = self.reading_of(s, typed)
            position = find(self.sb.book, FilterPosition, s.filter)
            head = bypass_head(
                position, entry.dp_bar, entry.indicator, lambda bar: fmt.pressure(bar, self.sb.prefs)
            ) if position else None  # fmt: skip
        except (BookError, sqlite3.Error, OSError) as exc:
            self.refuse(typed, write_problem(exc))
            return
        if head is None:
            self.write(s, entry, typed)
            return
        caution = f"{head}: {BYPASS_OPEN.upper()}.\n" + "\n".join(f"• {x}" for x in BYPASS_STEPS)

        def answered(yes: bool | None) -> None:
            if yes:
                self.write(s, entry, typed)
            else:
                self.refuse(typed, "put the value right, or Enter again to confirm.")

        self.app.push_screen(ConfirmScreen(f"Save this reading on {s.filter}?", caution), answered)

    def write(self, s: Stop, entry: Reading, typed: dict[str, str]) -> None:
        """Save in a thread (tui/base/workers.py write_behind); Enter meanwhile is refused."""
        self.saving = True
        self.say(f"Saving {s.filter}…")
        write_behind(
            self,
            self.sb.book.path,
            self.sb.session.clock,
            lambda book: record.log(book, entry),
            lambda saved: self.written(s, saved),
            lambda exc: self.refuse(typed, write_problem(exc)),
        )

    def written(self, s: Stop, saved: Reading) -> None:
        self.saving = False
        self.sb.book_changed()
        prefs = self.sb.prefs
        shown = (
            fmt.pressure(saved.dp_bar, prefs) if saved.dp_bar is not None else saved.indicator
        ) or ""
        self.done[s.filter.upper()] = f"✓ {shown}"
        self.say(f"Saved {s.filter}: {shown}." + (
            " An Enter typed while saving was not taken: check the value, press Enter again."
            if self.enter_refused else ""), bad=self.enter_refused)  # fmt: skip
        self.enter_refused = False
        self.advance(clear=False)

    def advance(self, clear: bool = True) -> None:
        if clear:  # a save empties the fields at its key, a skip here
            for n in self.FIELDS:
                self.query_one(f"#round-{n}", Input).value = ""
        index = self.query_one(RowTable).cursor_row
        self.show_rows()
        nxt = self.next_open(index + 1 if self.plan and index + 1 < len(self.plan.stops) else 0)
        if nxt is None:
            self.say("Round done: every filter read or skipped.")
        self.go_to(nxt if nxt is not None else index)

    @guarded
    def action_skip(self) -> None:
        s = self.stop()
        if s is None:
            return

        def accept(reason: str) -> str | None:
            entry = skip_note(s, reason, self.sb.tech)
            try:
                record.log(self.sb.book, entry)
            except (sqlite3.Error, OSError) as exc:
                return write_problem(exc)
            return None

        def skipped(reason: str | None) -> None:
            if reason is None:
                return
            self.sb.book_changed()
            self.done[s.filter.upper()] = "skipped"
            self.say(f"Skipped {s.filter}: {reason} (a note on {s.unit}).")
            self.advance()

        self.app.push_screen(
            AskScreen(
                f"Why is {s.filter} not read? (e.g. {', '.join(SKIP_REASONS[:3])})",
                "",
                accept,
                blink=self.sb.cursor_blink,
            ),
            skipped,
        )
