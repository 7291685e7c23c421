"""Who is on shift: pick your initials (remembered on this laptop), or add yourself."""

from __future__ import annotations

import time

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from store.base.errors import BookError
from store.ledger import register
from store.ledger.register import Technician
from tui.widgets import fmt
from tui.widgets.field import FieldInput


class SignInScreen(ModalScreen[str | None]):
    BINDINGS = [Binding("escape", "cancel", "Later", id="sign-in-cancel")]

    def __init__(self, current: str = "", blink: bool = True) -> None:
        super().__init__()
        self.current = current
        self.blink = blink
        self.typed, self.typed_at = "", 0.0  # type-ahead on the list of initials

    def compose(self) -> ComposeResult:
        with Vertical(id="sign-box", classes="prompt-box"):
            yield Static(
                "Who is on shift? Type your initials or pick them with ↑↓, Enter.",
                classes="form-title",
                markup=False,
            )
            yield OptionList(id="techs")
            yield Static("New here? Type initials and name, e.g. JK J. K., Enter:", markup=False)
            yield FieldInput(placeholder="initials name", compact=True, id="new-tech")
            yield Static("", id="sign-msg", classes="form-msg", markup=False)

    def on_mount(self) -> None:
        techs = [t for t in register.list_all(self.app.book, Technician) if t.active]  # type: ignore[attr-defined]
        options = self.query_one(OptionList)
        options.add_options([Option(fmt.shown(f"{t.tag:<6} {t.name}"), id=t.tag) for t in techs])
        self.query_one(Input).cursor_blink = self.blink
        if techs:
            tags = [t.tag for t in techs]
            options.highlighted = tags.index(self.current) if self.current in tags else 0
            options.focus()
        else:
            self.query_one(Input).focus()

    def on_key(self, event: events.Key) -> None:
        """Typed letters on the list jump to the first technician whose initials begin so
        (a pause of a second starts a new prefix). Initials nobody's begin with leave no one
        highlighted, so that Enter signs in nobody else, and say so."""
        options = self.query_one(OptionList)
        if not (options.has_focus and event.character and event.character.isalnum()):
            return
        now = time.monotonic()
        self.typed = (self.typed if now - self.typed_at < 1.0 else "") + event.character.upper()
        self.typed_at = now
        message = self.query_one("#sign-msg", Static)
        for i in range(options.option_count):
            if str(options.get_option_at_index(i).id).startswith(self.typed):
                options.highlighted = i
                message.update("")
                break
        else:
            options.highlighted = None
            message.update(
                f"No technician's initials begin {self.typed}: pick yours with ↑↓, or add "
                "yourself below"
            )
        event.stop()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        initials, _, name = event.value.strip().partition(" ")
        try:
            tech = register.add(
                self.app.book,  # type: ignore[attr-defined]
                Technician(tag=initials, name=name.strip()),
                by=initials.upper(),
            )
        except BookError as exc:
            self.query_one("#sign-msg", Static).update(f"Not added: {exc}")
            return
        self.dismiss(tech.tag)

    def action_cancel(self) -> None:
        self.dismiss(None)
