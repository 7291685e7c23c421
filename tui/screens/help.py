"""Help: every key of the app once (this screen's first), and what the words on screen mean.

The keys come from the one table in `tui/base/keys.py`, as the key strip and the palette do.
Lines wrap under their own column, never back to the left edge.
"""

from __future__ import annotations

import io
from collections.abc import Iterable, Sequence

from rich.console import Console, Group, RenderableType
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from store.health.status_model import FLAG_WORDS, URGENT_FLAGS
from tui.base.keys import ENTER, KEYS, Key, key_of

FLAG_MEANING = {
    "dp-drop": "ΔP fell with no element change: torn, collapsed or missing element, or "
    "bypass stuck open",
    "step-up": "ΔP jumped: dirt came in, for example after a repair or a top-up",
    "fast-loading": "this element loads clearly faster than the earlier ones: take a fluid "
    "sample, check the breather and recent top-ups",
    "at-bypass": "ΔP at or over the bypass setting: unfiltered oil is passing",
    "over-limit": "ΔP at or over the change limit: change the element",
    "indicator-bypass": "the indicator shows bypass",
    "indicator-dirty": "the indicator shows dirty",
    "cold-start-bypass": "a cold start would open the bypass: warm the oil before load",
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
    "water-high": "the latest sample holds more water than the oil keeps dissolved (300 ppm)",
    "new-element-high": "a new element is at half its change limit or more within 72 h",
}

COLUMNS = (
    (
        "Due",
        "likely day, then how many days earlier / later it may come (13 May −1/+2d); "
        "a day in another year than today also shows its year; OVERDUE when the likely "
        "day has passed or the limit is reached",
    ),
    ("Limit", "latest reference ΔP as a share of the change limit"),
    ("ΔP ref", "latest ΔP corrected to the reference viscosity and flow, in your unit"),
    ("Trend", "reference ΔP of this element, scaled 0 … change limit"),
    (
        "Basis",
        "earlier-curves (readings matched to earlier elements' curves), trend (fitted to "
        "this element alone), service-life (how long earlier elements lasted), interval "
        "(indicator only), none",
    ),
)

OTHER_SCREENS = (
    "the watch list",
    "the unit sheet",
    "the filter sheet",
    "the shift log",
    "the register",
)


def keys_written(key: Key) -> str:
    """'t  f2': the key as the strip writes it, and any other key for the same."""
    return f"{key.shown}  {key.also}" if key.also else key.shown


def key_rows(bindings: Iterable[Binding], enter: Key | None = None) -> list[tuple[str, str, str]]:
    """(keys, word, meaning) once per key, in the table's order."""
    order = {ident: n for n, ident in enumerate(KEYS)}
    rows: dict[str, tuple[int, tuple[str, str, str]]] = {}
    for b in bindings:
        if not b.description:
            continue
        key = key_of(b)
        ident = b.id or b.action
        rows.setdefault(ident, (order.get(ident, 99), (keys_written(key), key.word, key.meaning)))
    if enter is not None:
        rows["enter"] = (order["go-watch"] - 1, (enter.shown, enter.word, enter.meaning))
    return [row for _, row in sorted(rows.values(), key=lambda r: r[0])]


def grid(rows: Sequence[tuple[str, ...]], widths: Sequence[int]) -> Table:
    table = Table.grid(padding=(0, 1))
    for i, width in enumerate(widths):
        table.add_column(width=width, no_wrap=i < len(widths) - 1)
    table.add_column(ratio=1)
    for row in rows:
        table.add_row("", *row)
    return table


def head(text: str) -> Text:
    return Text(text, style="bold")


def help_body(
    screen_name: str,
    here: list[Binding],
    anywhere: list[Binding],
    elsewhere: dict[str, list[Binding]],
) -> list[RenderableType]:
    """What the help shows: this screen's keys, the keys that work anywhere, the keys of the
    other screens (each key once), then forms, columns and flags."""
    parts: list[RenderableType] = []
    shown: set[tuple[str, str]] = set()

    def section(title: str, rows: list[tuple[str, str, str]]) -> None:
        rows = [r for r in rows if (r[0], r[2]) not in shown]
        if not rows:
            return
        shown.update((r[0], r[2]) for r in rows)
        if parts:
            parts.append(Text(""))
        parts.append(head(title))
        parts.append(grid(rows, (1, 9, 10)))

    section(f"Keys on {screen_name}", key_rows(here, ENTER.get(screen_name)))
    section("Keys anywhere", key_rows(anywhere))
    for name, bindings in elsewhere.items():
        if name != screen_name:
            section(f"Keys on {name}", key_rows(bindings, ENTER.get(name)))
    parts.append(Text(""))
    parts.append(head("In forms"))
    parts.append(
        grid(
            [
                ("Tab  shift+Tab", "move between fields"),
                ("Enter  ctrl+s", "save (nothing is written until every field is valid)"),
                ("esc", "cancel"),
            ],
            (1, 15),
        )
    )
    parts.append(Text("  Units: as set in the register's Prefs tab."))
    parts.append(Text(""))
    parts.append(head("Watch columns"))
    parts.append(grid(COLUMNS, (1, 6)))
    parts.append(Text(""))
    parts.append(head("Flags (urgent ones also in reverse)"))
    rows = []
    for flag, word in FLAG_WORDS.items():
        meaning = FLAG_MEANING.get(flag, "")
        if flag in URGENT_FLAGS:
            meaning += " (urgent)"
        rows.append((word, meaning))
    parts.append(grid(rows, (1, 11)))
    return parts


class HelpScreen(ModalScreen[None]):
    BINDINGS = [
        Binding("escape,q,f1,question_mark", "close", "Close", id="help-close"),
    ]

    def __init__(
        self,
        screen_name: str,
        here: list[Binding],
        anywhere: list[Binding],
        elsewhere: dict[str, list[Binding]] | None = None,
    ) -> None:
        super().__init__()
        self.screen_name, self.here, self.anywhere = screen_name, here, anywhere
        self.elsewhere = elsewhere or {}

    def compose(self) -> ComposeResult:
        body = help_body(self.screen_name, self.here, self.anywhere, self.elsewhere)
        with Vertical(id="help-box", classes="prompt-box"):
            yield Static("Help  (esc closes)", classes="form-title", markup=False)
            with VerticalScroll(id="help-scroll"):
                yield Static(Group(*body), id="help-text")

    def on_mount(self) -> None:
        self.query_one("#help-scroll").focus()

    def plain(self, width: int = 74) -> str:
        """The help as plain lines at `width` columns (what the box shows, scrolled through)."""
        console = Console(width=width, record=True, file=io.StringIO())
        console.print(Group(*help_body(self.screen_name, self.here, self.anywhere, self.elsewhere)))
        return console.export_text()

    def action_close(self) -> None:
        self.dismiss(None)
