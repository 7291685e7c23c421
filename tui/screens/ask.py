"""A one-line question with a default answer, checked before it is accepted."""

from __future__ import annotations

from collections.abc import Callable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from store.base.errors import BookError
from tui.widgets.field import FieldInput


class AskScreen(ModalScreen[str | None]):
    """`accept(text)` returns None when the answer is fine, else the reason it is not;
    it may also act (and raise BookError, shown under the field)."""

    BINDINGS = [Binding("escape", "cancel", "Cancel", id="ask-cancel")]

    def __init__(
        self,
        question: str,
        default: str,
        accept: Callable[[str], str | None],
        help_text: str = "Enter accepts; Esc cancels.",
        blink: bool = True,
    ) -> None:
        super().__init__()
        self.question, self.default, self.accept = question, default, accept
        self.help_text, self.blink = help_text, blink

    def compose(self) -> ComposeResult:
        with Vertical(id="ask-box", classes="prompt-box"):
            yield Static(self.question, classes="form-title", markup=False)
            yield FieldInput(self.default, compact=True, id="ask-input")
            yield Static(self.help_text, id="ask-msg", classes="form-msg", markup=False)

    def on_mount(self) -> None:
        inp = self.query_one(Input)
        inp.cursor_blink = self.blink
        inp.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            problem = self.accept(event.value.strip())
        except BookError as exc:
            problem = str(exc)
        if problem:
            msg = self.query_one("#ask-msg", Static)
            msg.update("✗ " + problem)
            msg.add_class("-bad")
            return
        self.dismiss(event.value.strip())

    def action_cancel(self) -> None:
        self.dismiss(None)
