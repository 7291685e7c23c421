"""Where to write a file: a path with a sensible default, checked before it is used."""

from __future__ import annotations

from pathlib import Path

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static


class FilePrompt(ModalScreen[Path | None]):
    BINDINGS = [Binding("escape", "cancel", "Cancel", id="file-cancel")]

    def __init__(self, title: str, default: Path, blink: bool = True) -> None:
        super().__init__()
        self.title_text = title
        self.default = default
        self.blink = blink

    def compose(self) -> ComposeResult:
        with Vertical(id="file-box", classes="prompt-box"):
            yield Static(self.title_text, classes="form-title", markup=False)
            yield Input(str(self.default), compact=True, id="file-input")
            yield Static(
                "Enter writes the file; Esc cancels.",
                id="file-msg",
                classes="form-msg",
                markup=False,
            )

    def on_mount(self) -> None:
        inp = self.query_one(Input)
        inp.cursor_blink = self.blink
        inp.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        text = event.value.strip()
        msg = self.query_one("#file-msg", Static)
        if not text:
            msg.update("give a file name")
            return
        path = Path(text).expanduser()
        if path.is_dir():
            msg.update(f"{path} is a folder: add a file name")
            return
        if not path.parent.exists():
            msg.update(f"no folder {path.parent}")
            return
        if path.exists():
            msg.update(f"{path.name} exists already: choose a new name")
            return
        self.dismiss(path)

    def action_cancel(self) -> None:
        self.dismiss(None)
