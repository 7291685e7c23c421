"""The shape every entry form shares: fields with inline checks, an optional safety
acknowledgement, save through `store.ledger.journal.log`, and nothing written until all is valid.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from textual.actions import SkipAction
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.screen import ModalScreen
from textual.widget import Widget
from textual.widgets import Button, Checkbox, Input, Select, Static

from store import Book, record
from store.base.errors import BookError
from store.base.timeutil import local_text, parse_typed_time
from store.ledger import entry_input
from store.ledger.entries import Entry
from store.ledger.entry_input import FieldError
from store.ledger.register import Technician, list_all
from store.sheets import WatchRow, saved_row
from tui.base.host import Host
from tui.base.workers import write_behind
from tui.forms.confirm import ConfirmScreen
from tui.forms.validators import TagValidator, TimeValidator
from tui.widgets.caution import Caution
from tui.widgets.field import FieldRow, Spec, TickBox, value_of
from tui.widgets.inorder import read_at_key


@dataclass(frozen=True)
class Saved:
    """What a form hands back: the entry as the book holds it, and the status before."""

    entry: Entry
    before: Any = None  # FilterStatus / BreatherStatus before the entry, when known


class EntrySaved(Message):
    """An entry was saved (posted to the app): the entry as the book holds it, the watch-list
    row the save changed as the store returned it (`sheets.saved_row`: the status the save
    kept, not computed again), and the row before, when known."""

    def __init__(self, entry: Entry, after: WatchRow | None, before: Any = None) -> None:
        super().__init__()
        self.entry, self.after, self.before = entry, after, before


def fault_field(message: str, clues: dict[str, str]) -> str | None:
    """The field a refusal is about: of the clue words in the message, the one said first
    (a combination such as 'the limit must be below the bypass' is about its subject)."""
    text = message.lower()
    found = [(text.find(word), name) for word, name in clues.items() if word in text]
    return min(found)[1] if found else None


def write_problem(exc: BaseException) -> str:
    """A one-line reason a write failed, for the form."""
    if isinstance(exc, BookError):
        return str(exc)
    text = str(exc).lower()
    if "locked" in text or "busy" in text:
        return "the logbook is busy (another program is writing): try again in a moment"
    if "readonly" in text or "read-only" in text:
        return "the logbook is read-only here: check the file's permissions"
    if "full" in text:
        return "the disk is full: free some space, then save again"
    if isinstance(exc, OSError):
        return f"the file system refused: {exc.strerror or exc}"
    return f"the logbook refused: {exc}"


FIELD_KEYS = (
    Binding("tab", "app.focus_next", show=False, priority=True),
    Binding("shift+tab", "app.focus_previous", show=False, priority=True),
)
# The save keys are seen at the moment they arrive, before the keys after them are routed
# (priority): the form is read as it stood at the key (tui/widgets/inorder.py).
SAVE_KEYS = (
    Binding("ctrl+s", "save", "Save", id="form-save", priority=True),
    Binding("enter", "enter", show=False, priority=True),
)


class SavesAtKey:
    """What the entry and register forms share: the save keys, the fields read as they
    stood at the key, and one save at a time (`saving`: a save key meanwhile is refused)."""

    saving = False

    def save_now(self, values: dict[str, Any]) -> None:
        raise NotImplementedError

    def say(self, text: str) -> None:
        raise NotImplementedError

    def action_enter(self) -> None:
        """Enter saves from a text field and presses a focused button; anywhere else (a
        choice, its list, a tick box) it does what it does there."""
        screen: Any = self
        focused = screen.focused
        if isinstance(focused, Button):
            screen.action_save() if focused.id == "save" else screen.action_cancel()
        elif isinstance(focused, Input):
            screen.action_save()
        else:
            raise SkipAction()

    def action_save(self) -> None:
        if self.saving:
            self.say("Saving… (the save key again is not a second save)")
            return
        self.saving = True
        screen: Any = self
        named = {row.control: row.spec.name for row in screen.query(FieldRow)}
        named.update({box: "ack" for box in screen.query("#ack")})

        def read(values: dict[Widget, Any]) -> None:
            if screen.is_attached:
                self.save_now({named[c]: v for c, v in values.items()})

        read_at_key(named, value_of, read)


class EntryForm(SavesAtKey, ModalScreen[Saved | None]):
    """Subclasses give `heading`, `specs()`, `build(values)`; `first` names the field to start in."""

    BINDINGS = [
        *SAVE_KEYS,
        Binding("escape", "cancel", "Cancel", id="form-cancel"),
        # Tab moves on at the moment it is typed, before the keys after it are routed: typed
        # fast ("4.1", Tab, "52"), or sent by a scanner, the next keys land in the next field.
        *FIELD_KEYS,
    ]
    heading = "Entry"
    kind = ""  # the entry kind (Entry.kind) this form builds
    caution = False
    # a caution shown without a tick: the work the entry records carries hazards of its own
    caution_text = ""
    first = ""
    # words in a refusal -> the field it is about (see fault_field); forms add their own
    clues: dict[str, str] = {
        "time": "time",
        "ahead": "time",
        "technician": "by",
        "initials": "by",
        "note": "note",
    }

    def __init__(self, target: str = "", before: Any = None, **preset: str) -> None:
        super().__init__()
        self.target = target
        self.before = before
        self.preset = preset
        self.saved: Entry | None = None
        self.load_problem = ""
        self.refusal = ""  # what the "Not saved" line is about: a field name, "*" (checks), ""
        self.values_saved: dict[str, Any] = {}  # the fields as read at the last save key

    @property
    def sb(self) -> Host:
        return self.app  # type: ignore[return-value]

    # ---- what subclasses give ----

    def specs(self) -> list[Spec]:
        raise NotImplementedError

    def build(self, values: dict[str, Any]) -> Entry:
        """The entry from the fields, by the one entry builder (store/ledger/entry_input.py)
        that `sumpbook log` uses too."""
        return entry_input.build(
            self.kind,
            values,
            self.sb.prefs,
            at=self.when(values["time"]),
            by=values["by"],
            note=values.get("note") or "",
        )

    def question(self, entry: Entry) -> tuple[str, str] | None:
        """(title, caution) when the entry may be true but is urgent: asked before saving."""
        return None

    # ---- common fields ----

    def tag_spec(
        self,
        name: str,
        cls: type,
        what: str,
        value: str,
        required: bool = True,
        hint: str = "",
        label: str = "",
    ) -> Spec:
        """A field that takes a register tag, checked against the book with a suggestion."""
        book = self.sb.book
        return Spec(
            name,
            label or what.capitalize(),
            value,
            [TagValidator(lambda: [r.tag for r in list_all(book, cls)], what)],
            required=required,
            hint=hint,
        )

    def common_specs(self) -> list[Spec]:
        book = self.sb.book
        return [
            Spec(
                "time",
                "Time",
                self.preset.get("time", local_text(book.now(), book.local_zone())),
                [TimeValidator(book.local_zone(), book.now)],
                required=True,
                hint="plant time",
            ),
            self.tag_spec(
                "by",
                Technician,
                "technician",
                self.preset.get("by", self.sb.tech),
                hint="initials",
                label="By",
            ),
            Spec("note", "Note", self.preset.get("note", "")),
        ]

    def when(self, text: str) -> datetime | None:
        """None keeps the book's own 'now' when the time was left as it came."""
        book = self.sb.book
        if text == local_text(book.now(), book.local_zone()) and "time" not in self.preset:
            return None
        return parse_typed_time(text, book.local_zone(), now=book.now()).at

    # ---- layout ----

    def compose(self) -> ComposeResult:
        try:
            specs = self.specs()  # may set the heading and the first field
        except (BookError, sqlite3.Error, OSError) as exc:
            specs, self.first = [], ""
            self.load_problem = f"The form could not be filled: {write_problem(exc)}"
        classes = "form-box -caution" if self.caution or self.caution_text else "form-box"
        with Vertical(id="form-box", classes=classes):
            yield Static(self.heading, id="form-title", classes="form-title", markup=False)
            if self.caution:
                yield Caution()
            elif self.caution_text:
                yield Caution(self.caution_text)
            with VerticalScroll(id="form-fields"):
                for spec in specs:
                    yield FieldRow(spec)
            if self.caution:
                yield TickBox("I have made it safe as above (space ticks)", id="ack", compact=True)
            yield Static("", id="form-msg", classes="form-msg", markup=False)
            with Horizontal(classes="form-buttons"):
                yield Button("Save  ctrl+s", id="save", variant="primary", compact=True)
                yield Button("Cancel  esc", id="cancel", compact=True)

    def on_mount(self) -> None:
        for inp in self.query(Input):
            inp.cursor_blink = self.sb.cursor_blink
        if self.first:
            self.query_one(f"#f-{self.first}").focus()
        if self.load_problem:
            self.say(self.load_problem)

    def rows(self) -> list[FieldRow]:
        return list(self.query(FieldRow))

    def values(self) -> dict[str, Any]:
        return {row.spec.name: row.value() for row in self.rows()}

    def say(self, text: str, bad: bool = True) -> None:
        msg = self.query_one("#form-msg", Static)
        msg.update(text)
        msg.set_class(bad, "-bad")

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "f-time":
            self.say_day_taken(event.value)
        self.refusal_fixed(event.input.id or "")

    def on_select_changed(self, event: Select.Changed) -> None:
        self.refusal_fixed(event.select.id or "")

    def on_checkbox_changed(self, event: Checkbox.Changed) -> None:
        if self.refusal == "ack" and event.checkbox.id == "ack" and event.value:
            self.refusal = ""
            self.say("")

    def refusal_fixed(self, control_id: str) -> None:
        """The "Not saved" line goes once what it was about is fixed: every field checks out
        (a field's own refusal), or the field the book refused was changed."""
        if not self.refusal:
            return
        if self.refusal == "*":
            if any(row.check_value() for row in self.rows()):
                return
        elif control_id != f"f-{self.refusal}":
            return
        elif value_of(self.query_one(f"#{control_id}")) == self.values_saved.get(self.refusal):
            return  # a change on its way from before the save key, not a fix
        self.refusal = ""
        self.say("")

    def focus_fix(self, control: Widget) -> None:
        """Focus the field to fix with the cursor after what was typed: focusing an input
        selects its text, and the next key typed replaced it (a tag lost to a `Q`)."""
        if isinstance(control, Input):
            control.select_on_focus = False
        control.focus()
        if isinstance(control, Input):
            control.cursor_position = len(control.value)

    def say_day_taken(self, text: str) -> None:
        """Under a time typed without its date, the date it was taken for."""
        book = self.sb.book
        try:
            typed = parse_typed_time(text, book.local_zone(), now=book.now())
        except BookError:
            return  # the field's own check shows why
        if typed.day:
            taken = typed.at.astimezone(book.local_zone())
            self.query_one("#m-time", Static).update(f"{typed.day}, {taken:%a %d %b %Y %H:%M}")

    # ---- saving ----

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        if event.button.id == "save":
            self.action_save()
        else:
            self.action_cancel()

    def action_cancel(self) -> None:
        if self.saving:  # a save under way cannot be called back: it lands, then the form goes
            self.say("Saving… (it cannot be called back; the form closes once it is saved)")
            return
        self.dismiss(None)

    def save_now(self, values: dict[str, Any]) -> None:
        """Check and save `values`, the fields as they stood at the save key."""
        self.saving = False
        self.values_saved = values
        rows = self.rows()
        bad = [
            (row, p)
            for row in rows
            if (p := row.check_value(force=True, value=values[row.spec.name]))
        ]
        if bad:
            self.focus_fix(bad[0][0].control)
            names = ", ".join(row.spec.label for row, _ in bad)
            self.say(f"Not saved: check {names}.")
            self.refusal = "*"
            return
        if self.caution and not values.get("ack"):
            self.query_one("#ack", Checkbox).focus()
            self.say("Not saved: tick the safety acknowledgement first.")
            self.refusal = "ack"
            return
        try:
            entry = self.build({row.spec.name: values[row.spec.name] for row in rows})
            ask = self.question(entry)
        except (BookError, sqlite3.Error, OSError) as exc:
            self.refused(exc)
            return
        if ask is None:
            self.write(entry)
            return

        def answered(yes: bool | None) -> None:
            if yes:
                self.write(entry)
            else:
                self.say("Not saved yet: change what is wrong, or save again to confirm.")

        self.app.push_screen(ConfirmScreen(*ask), answered)

    def write(self, entry: Entry) -> None:
        """Save in a thread (tui/base/workers.py write_behind): the form says it is saving
        and refuses a second save until this one is done."""
        self.saving = True
        self.say("Saving…", bad=False)

        def job(book: Book) -> tuple[Entry, WatchRow | None]:
            logged = record.save(book, entry)
            return logged.entry, saved_row(book, logged)

        write_behind(
            self, self.sb.book.path, self.sb.session.clock, job, self.written, self.refused
        )

    def written(self, result: tuple[Entry, WatchRow | None]) -> None:
        saved, after = result
        self.saving = False
        self.saved = saved
        self.app.post_message(EntrySaved(saved, after, self.before))
        self.dismiss(Saved(saved, self.before))

    def refused(self, exc: BaseException) -> None:
        """Say why; put the cursor on the field at fault and mark it."""
        self.saving = False
        problem = write_problem(exc)
        self.say("Not saved: " + problem)
        name = exc.field if isinstance(exc, FieldError) else None
        if name is None and isinstance(exc, BookError):
            name = fault_field(problem, self.clues)
        rows = {row.spec.name: row for row in self.rows()}
        if name in rows and not rows[name].spec.disabled:
            self.focus_fix(rows[name].control)
            rows[name].show("see below")
            self.refusal = name
