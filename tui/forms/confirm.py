"""A question before an urgent entry is saved: the caution, then y saves and n goes back."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Static

from tui.widgets.caution import Caution


class ConfirmScreen(ModalScreen[bool]):
    """True to save as it is, False to go back to the form (nothing written)."""

    BINDINGS = [
        Binding("y", "answer(True)", "Save", id="confirm-yes"),
        Binding("n,escape", "answer(False)", "Back", id="confirm-no"),
    ]

    def __init__(self, title: str, caution: str) -> None:
        super().__init__()
        self.title_text, self.caution = title, caution

    def compose(self) -> ComposeResult:
        with Vertical(id="confirm-box", classes="form-box -caution"):
            yield Static(self.title_text, classes="form-title", markup=False)
            yield Caution(self.caution)
            with Horizontal(classes="form-buttons"):
                yield Button("Save it  y", id="confirm-save", variant="warning", compact=True)
                yield Button("Back to the form  n", id="confirm-back", compact=True)

    def on_mount(self) -> None:
        self.query_one("#confirm-back", Button).focus()  # Enter alone does not save

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "confirm-save")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
