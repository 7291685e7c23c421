"""Quick entry by tag: type or scan a tag, Enter. A filter goes straight to its reading form."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from store.sheets import TagHit, match_tags

from ..widgets import fmt


class TagPrompt(ModalScreen[TagHit | None]):
    """Enter takes the exact tag, or the only match, or the highlighted one."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", id="tag-cancel"),
        Binding("down", "move(1)", "Next", show=False),
        Binding("up", "move(-1)", "Previous", show=False),
    ]

    def __init__(self, hits: list[TagHit], blink: bool = True) -> None:
        super().__init__()
        self.hits = hits
        self.blink = blink
        self.matches: list[TagHit] = []

    def compose(self) -> ComposeResult:
        with Vertical(id="tag-box", classes="prompt-box"):
            yield Static("Tag: type or scan, then Enter", classes="form-title", markup=False)
            yield Input(placeholder="e.g. P1-RF", compact=True, id="tag-input")
            yield OptionList(id="tag-list")
            yield Static("", id="tag-msg", classes="form-msg", markup=False)

    def on_mount(self) -> None:
        inp = self.query_one(Input)
        inp.cursor_blink = self.blink
        inp.focus()
        self.refill("")

    def refill(self, text: str) -> None:
        self.matches = match_tags(text, self.hits)
        options = self.query_one(OptionList)
        options.clear_options()
        options.add_options(
            [
                Option(fmt.shown(f"{h.tag:<16} {h.label}"), id=str(i))
                for i, h in enumerate(self.matches)
            ]
        )
        if self.matches:
            options.highlighted = 0
        msg = self.query_one("#tag-msg", Static)
        msg.update("" if self.matches or not text.strip() else f"no tag like '{text.strip()}'")

    def on_input_changed(self, event: Input.Changed) -> None:
        self.refill(event.value)

    def action_move(self, step: int) -> None:
        options = self.query_one(OptionList)
        if self.matches:
            now = options.highlighted or 0
            options.highlighted = max(0, min(len(self.matches) - 1, now + step))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if not self.matches:
            self.query_one("#tag-msg", Static).update(
                f"unknown tag '{event.value.strip()}': check the label, or register it"
            )
            return
        index = self.query_one(OptionList).highlighted or 0
        self.dismiss(self.matches[index])

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(self.matches[int(event.option.id or 0)])

    def action_cancel(self) -> None:
        self.dismiss(None)
