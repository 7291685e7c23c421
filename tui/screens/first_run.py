"""First run: the logbook is empty. Look around the demo plant, or register your own."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from ..widgets.wrapped import Wrapped

GUIDE = """\
This logbook is empty.

  d   Open the demo plant: a small invented plant with a few months of
      readings, to see what the app does. Your logbook is not touched.

  g   Register your own plant, in this order:
        1. yourself (initials)    2. the fluids    3. the units
        4. their filters and breathers    5. the shift pattern
      Then log readings with t (scan or type a tag).

  Esc Stay in the empty logbook.    ? Help at any time.
"""


class FirstRunScreen(ModalScreen[str | None]):
    BINDINGS = [
        Binding("d", "choose('demo')", "Demo plant", id="first-demo"),
        Binding("g", "choose('register')", "Register", id="first-register"),
        Binding("escape", "choose('')", "Stay", id="first-stay"),
    ]

    def compose(self) -> ComposeResult:
        with Vertical(id="first-box", classes="prompt-box"):
            yield Static("Welcome to sumpbook", classes="form-title", markup=False)
            yield Wrapped(GUIDE, hanging=True)

    def action_choose(self, what: str) -> None:
        self.dismiss(what or None)
