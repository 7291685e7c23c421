"""Quick entry by tag: type or scan a tag, Enter. An exact tag goes straight to its form;
anything else shows the tags it may have meant and waits for a pick."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from store.sheets import TagHit, match_tags
from tui.widgets import fmt
from tui.widgets.field import FieldInput

PICK_HINT = "↓ ↑ to pick one, then Enter"


class TagPrompt(ModalScreen[TagHit | None]):
    """Enter opens the tag typed exactly (any case). A near miss never opens another tag's
    form by itself: the candidates show, and ↓/↑ (or a click) picks one."""

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
        self.picked = False  # the highlight was moved by hand since the text last changed

    def compose(self) -> ComposeResult:
        with Vertical(id="tag-box", classes="prompt-box"):
            yield Static("Tag: type or scan, then Enter", classes="form-title", markup=False)
            yield FieldInput(placeholder=self.example(), compact=True, id="tag-input")
            yield OptionList(id="tag-list")
            yield Static("", id="tag-msg", classes="form-msg", markup=False)

    def example(self) -> str:
        """The placeholder names a filter this book has (a made-up tag only sends a new
        technician looking for it); none at all in an empty book."""
        first = next((h.tag for h in self.hits if h.what == "filter"), "")
        first = first or next((h.tag for h in self.hits), "")
        return f"e.g. {first}" if first else "a filter, breather or unit tag"

    def on_mount(self) -> None:
        inp = self.query_one(Input)
        inp.cursor_blink = self.blink
        inp.focus()
        self.refill("")

    def refill(self, text: str) -> None:
        self.matches = match_tags(text, self.hits)
        self.picked = False
        options = self.query_one(OptionList)
        options.clear_options()
        options.add_options(
            [
                Option(fmt.shown(f"{h.tag:<16} {h.label}"), id=str(i))
                for i, h in enumerate(self.matches)
            ]
        )
        options.highlighted = None  # nothing is chosen until Enter finds it exact or ↓ picks
        self.say("" if self.matches or not text.strip() else f"no tag like '{text.strip()}'")

    def say(self, text: str, bad: bool = False) -> None:
        msg = self.query_one("#tag-msg", Static)
        msg.update(text)
        msg.set_class(bad, "-bad")

    def on_input_changed(self, event: Input.Changed) -> None:
        self.refill(event.value)

    def action_move(self, step: int) -> None:
        options = self.query_one(OptionList)
        if not self.matches:
            return
        now = options.highlighted
        start = -1 if step > 0 else len(self.matches)
        options.highlighted = max(
            0, min(len(self.matches) - 1, (start if now is None else now) + step)
        )
        self.picked = True
        self.say(f"Enter opens {self.matches[options.highlighted].tag}")

    def exact(self, text: str) -> TagHit | None:
        typed = text.strip().upper()
        found = [h for h in self.hits if h.tag.upper() == typed]
        return found[0] if len(found) == 1 else None

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        # Read from the submitted text itself: a scanner's burst ends in Enter, and that
        # Enter must act on every character it sent.
        hit = self.exact(event.value)
        if hit is not None:
            self.dismiss(hit)
            return
        highlighted = self.query_one(OptionList).highlighted
        if self.picked and highlighted is not None and highlighted < len(self.matches):
            self.dismiss(self.matches[highlighted])
            return
        typed = event.value.strip()
        if not self.matches:
            self.say(f"unknown tag '{typed}': check the label, or register it", bad=True)
            return
        names = ", ".join(h.tag for h in self.matches[:4])
        self.say(f"no tag '{typed.upper()}'. Did you mean {names}? {PICK_HINT}", bad=True)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(self.matches[int(event.option.id or 0)])

    def action_cancel(self) -> None:
        self.dismiss(None)
