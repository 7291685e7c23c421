"""Void: cancel a mistaken entry. It stays in the book, marked, with the reason."""

from __future__ import annotations

from typing import Any

from textual.validation import ValidationResult, Validator
from textual.widgets import Input, Static

from store.base.errors import BookError
from store.ledger.entries import Entry, Void
from store.ledger.journal import find_entry
from tui.base.render import describe
from tui.forms.base import EntryForm
from tui.widgets import fmt
from tui.widgets.field import Spec


class EntryIdValidator(Validator):
    """The first 6 or more characters of an entry id that the book knows."""

    def __init__(self, form: VoidForm) -> None:
        super().__init__()
        self.form = form

    def validate(self, value: str) -> ValidationResult:
        try:
            entry = find_entry(self.form.sb.book, value)
        except BookError as exc:
            return self.failure(str(exc))
        if entry.kind == "void":
            return self.failure("a void cannot be voided")
        if entry.voided:
            return self.failure("voided already")
        return self.success()


class VoidForm(EntryForm):
    kind = "void"
    heading = "Void an entry (it stays in the book, marked void)"

    def specs(self) -> list[Spec]:
        self.first = "reason" if self.target else "entry"
        specs = [
            Spec(
                "entry",
                "Entry id",
                self.short_id(self.target),
                [EntryIdValidator(self)],
                required=True,
                hint="its first 6 or more characters",
            ),
            Spec("reason", "Why void", "", required=True, hint="e.g. wrong filter tag"),
            *self.common_specs(),
        ]
        return [s for s in specs if s.name != "note"]

    def on_mount(self) -> None:
        super().on_mount()
        self.query_one("#form-fields").mount(Static("", id="void-what", markup=False), before=0)
        self.call_after_refresh(self.describe_target, self.target)

    def short_id(self, entry_id: str) -> str:
        """The id as the shift log shows it (8 characters) when that names the entry alone:
        the whole id does not fit its field and would run into the hint beside it."""
        if len(entry_id) <= 8:
            return entry_id
        try:
            return (
                entry_id[:8] if find_entry(self.sb.book, entry_id[:8]).id == entry_id else entry_id
            )
        except BookError:
            return entry_id

    def on_input_changed(self, event: Input.Changed) -> None:
        super().on_input_changed(event)
        if event.input.id == "f-entry":
            self.describe_target(event.value)

    def describe_target(self, text: str) -> None:
        try:
            entry = find_entry(self.sb.book, text)
        except BookError:
            line = "which entry? (the shift log shows the ids)"
        else:
            line = self.entry_line(entry)
        if self.is_mounted and self.query("#void-what"):
            self.query_one("#void-what", Static).update(line)

    def question(self, entry: Entry) -> tuple[str, str] | None:
        """Always asked: what will be voided, and whose it is, before it is saved."""
        if not isinstance(entry, Void):
            return None
        target = find_entry(self.sb.book, entry.voids)
        whose = (
            f"logged by {target.by}, not by you"
            if target.by.upper() != entry.by.upper()
            else "your own entry"
        )
        return (
            f"Void entry {target.id[:8]} ({whose})?",
            f"{self.entry_line(target)}\nIt stays in the book, struck through, with the reason: "
            f"{entry.note}",
        )

    def entry_line(self, entry: Entry) -> str:
        local = self.sb.book.local_zone()
        return (
            f"{entry.id[:8]} {entry.kind} {entry.target or entry.unit or ''} "
            f"{fmt.stamp(entry.at, local)} by {entry.by}: {describe(entry, self.sb.prefs)}"
        )

    def build(self, v: dict[str, Any]) -> Entry:
        voids = find_entry(self.sb.book, v["entry"]).id  # the whole id, not what was typed
        return super().build({**v, "entry": voids})
