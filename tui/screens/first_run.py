"""First run: the logbook is empty, or the one asked for does not exist yet. Look around
the demo plant, or register your own."""

from __future__ import annotations

from pathlib import Path

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from tui.widgets.wrapped import Wrapped

DEMO_CHOICE = """\
  d   Open the demo plant: a small invented plant with a few
      months of readings, to see what the app does. A fresh copy
      each time: what you log there is not kept."""

ORDER = """\
        1. yourself (initials)    2. the fluids    3. the units
        4. their filters and breathers    5. the shift pattern
      Then log readings with t (scan or type a tag)."""

GUIDE = f"""\
This logbook is empty.

{DEMO_CHOICE}

  g   Register your own plant, in this order:
{ORDER}

  Esc Stay in the empty logbook.    ? Help at any time.
"""

NEW_GUIDE = """\
There is no logbook at
  {path}

  g   Create it there and register your plant, in this order:
{order}

{demo}

  q   Quit: nothing is created.
"""


class FirstRunScreen(ModalScreen[str | None]):
    """Dismissed with 'demo', 'register', 'quit' or None (stay)."""

    BINDINGS = [
        Binding("d", "choose('demo')", "Demo plant", id="first-demo"),
        Binding("g", "choose('register')", "Register", id="first-register"),
        Binding("escape", "choose('')", "Stay", id="first-stay"),
        Binding("q", "choose('quit')", "Quit", id="first-quit"),
    ]

    def __init__(self, new_path: Path | None = None) -> None:
        super().__init__()
        self.new_path = new_path

    def compose(self) -> ComposeResult:
        if self.new_path is None:
            title, text = "Welcome to sumpbook", GUIDE
        else:
            title = "Welcome to sumpbook: a new logbook"
            text = NEW_GUIDE.format(path=self.new_path, order=ORDER, demo=DEMO_CHOICE)
        with Vertical(id="first-box", classes="prompt-box"):
            yield Static(title, classes="form-title", markup=False)
            yield Wrapped(text, hanging=True, id="first-guide")

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        # A new logbook: nothing to stay in (Esc), but quitting creates nothing (q).
        if action == "choose" and parameters:
            if parameters[0] == "" and self.new_path is not None:
                return False
            if parameters[0] == "quit" and self.new_path is None:
                return False
        return True

    def action_choose(self, what: str) -> None:
        self.dismiss(what or None)
