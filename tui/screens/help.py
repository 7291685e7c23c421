"""Help: every key of this screen and of the whole app, and what the words on screen mean."""

from __future__ import annotations

from collections.abc import Iterable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from store.status import FLAG_WORDS

from .common import long_name

FLAG_MEANING = {
    "dp-drop": "ΔP fell with no element change: torn, collapsed or missing element, or "
    "bypass stuck open (urgent)",
    "step-up": "ΔP jumped: dirt came in (after a repair or a top-up?)",
    "fast-loading": "this element loads clearly faster than the earlier ones: take a fluid "
    "sample, check the breather and recent top-ups",
    "at-bypass": "ΔP at or over the bypass setting: unfiltered oil is passing (urgent)",
    "over-limit": "ΔP at or over the change limit: change the element",
    "indicator-bypass": "the indicator shows bypass (urgent)",
    "indicator-dirty": "the indicator shows dirty",
    "cold-start-bypass": "a cold start would open the bypass (urgent)",
    "reading-overdue": "no reading for 1.5 × the reading interval",
    "hot": "fluid over the unit's temperature limit",
    "no-limits": "no change limit or bypass setting registered: no due date",
    "swap-overdue": "breather swap is past due",
    "desiccant-spent": "the last cartridge came out fully spent",
    "leak-suspect": "top-ups are rising against the unit's own history: look for a leak "
    "(never by hand)",
    "unfiltered-topup": "oil went in unfiltered in the last 30 days",
    "coarse-topup": "oil went in through a cart coarser than the unit's finest filter",
    "over-target": "the latest sample is dirtier than the unit's target code",
}

COLUMNS = """\
Watch columns
  Due    likely day, then how many days earlier / later it may come
         (13 May −1/+2d); OVERDUE when the likely day has passed or the
         limit is reached
  Limit  latest reference ΔP as a share of the change limit (bar of 5)
  ΔP ref latest ΔP corrected to the reference viscosity and flow
  Trend  reference ΔP of this element, scaled 0 … change limit
  Basis  earlier-curves (readings matched to earlier elements' curves),
         trend (fitted to this element alone), service-life (how long earlier
         elements lasted), interval (indicator only), none
"""


def key_lines(bindings: Iterable[Binding]) -> list[str]:
    lines = []
    seen = set()
    for b in bindings:
        if b.action in seen or not b.description:
            continue
        seen.add(b.action)
        keys = " / ".join(
            {
                "question_mark": "?",
                "slash": "/",
                "left_square_bracket": "[",
                "right_square_bracket": "]",
                "full_stop": ".",
            }.get(k.strip(), k.strip())
            for k in b.key.split(",")
        )
        lines.append(f"  {keys:<14} {long_name(b)}")
    return lines


class HelpScreen(ModalScreen[None]):
    BINDINGS = [
        Binding("escape,q,f1,question_mark", "close", "Close", id="help-close"),
    ]

    def __init__(self, screen_name: str, here: list[Binding], anywhere: list[Binding]) -> None:
        super().__init__()
        self.screen_name, self.here, self.anywhere = screen_name, here, anywhere

    def compose(self) -> ComposeResult:
        text = [f"Keys on {self.screen_name}", *key_lines(self.here), ""]
        text += ["Keys anywhere", *key_lines(self.anywhere)]
        text += ["  ctrl+p         every action by name (command palette)", ""]
        text += [
            "In forms: Tab / shift+Tab move, Enter or ctrl+s saves, Esc cancels.",
            "Nothing is written until every field is valid. Units: as set in Register.",
            "",
            COLUMNS,
            "Flags (shown as words)",
        ]
        text += [f"  {FLAG_WORDS[k]:<12} {v}" for k, v in FLAG_MEANING.items()]
        with Vertical(id="help-box", classes="prompt-box"):
            yield Static("Help  (Esc closes)", classes="form-title", markup=False)
            with VerticalScroll(id="help-scroll"):
                yield Static("\n".join(text), markup=False)

    def on_mount(self) -> None:
        self.query_one("#help-scroll").focus()

    def action_close(self) -> None:
        self.dismiss(None)
