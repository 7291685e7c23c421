"""The key strip: one line at the bottom with the keys of the screen, grouped by task
(log · look · book), each group under its own label. Keys are written as the help writes
them (`ctrl+p`, `esc`, `f5`); a click on a key presses it. Where the line is too short, the
keys that matter least on that screen give way first and `?` says how many the help has more.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.style import Style
from rich.text import Text
from textual import events
from textual.screen import Screen
from textual.widget import Widget

from tui.base.keys import ENTER, GROUPS, KEYS, Key, key_of


@dataclass(frozen=True)
class Item:
    press: str  # the key name Textual knows ("question_mark", "enter")
    key: Key
    enabled: bool = True
    order: int = 99  # the table's order


def fit(items: list[Item], width: int) -> tuple[list[Item], int]:
    """The items that fit on `width` columns, in table order, and how many gave way."""
    kept = list(items)
    while kept and line_width(kept, len(items) - len(kept)) > width:
        drop = max(
            (i for i in kept if i.key.rank > 0),
            key=lambda i: (i.key.rank, kept.index(i)),
            default=None,
        )
        if drop is None:
            break
        kept.remove(drop)
    return kept, len(items) - len(kept)


def item_text(item: Item, hidden: int) -> str:
    more = f" +{hidden}" if hidden and item.key is KEYS["help"] else ""
    return f"{item.key.shown} {item.key.word}{more}"


def line_width(items: list[Item], hidden: int) -> int:
    return compose_line(items, hidden)[0].cell_len


PLAIN: dict[str, Style | str] = {}


def compose_line(
    items: list[Item], hidden: int, styles: dict[str, Style | str] = PLAIN
) -> tuple[Text, list[tuple[int, int, str]]]:
    """The line as text, and (start, end, key to press) for every key on it."""
    text = Text(no_wrap=True, overflow="crop")
    spans: list[tuple[int, int, str]] = []
    for group in GROUPS:
        members = [i for i in items if i.key.group == group]
        if not members:
            continue
        if text:
            text.append(" ")
        text.append(f" {group} ", style=styles.get("group", ""))
        for n, item in enumerate(members):
            text.append("  " if n else " ")
            start = len(text)
            on = "" if item.enabled else "off"
            text.append(item.key.shown, style=styles.get(on or "key", ""))
            text.append(item_text(item, hidden)[len(item.key.shown) :], style=styles.get(on, ""))
            spans.append((start, len(text), item.press))
    return text, spans


ORDER = {ident: n for n, ident in enumerate(KEYS)}


class KeyStrip(Widget):
    COMPONENT_CLASSES = {"keystrip--group", "keystrip--key", "keystrip--off"}
    DEFAULT_CSS = """
    KeyStrip {
        dock: bottom;
        height: 1;
        background: $panel;
        color: $foreground;
    }
    KeyStrip > .keystrip--group { background: $primary; color: $background; text-style: bold; }
    KeyStrip > .keystrip--key { color: $accent; text-style: bold; }
    KeyStrip > .keystrip--off { color: $text-disabled; }
    """

    def __init__(self) -> None:
        super().__init__()
        self.items: tuple[Item, ...] = ()
        self.spans: list[tuple[int, int, str]] = []

    def on_mount(self) -> None:
        self.screen.bindings_updated_signal.subscribe(self, self.bindings_changed)
        self.bindings_changed(self.screen)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def bindings_changed(self, screen: Screen) -> None:
        """Read the screen's keys; repaint only when they differ from those on show."""
        if screen is not self.screen:
            return
        items: list[Item] = []
        seen: set[str] = set()
        for active in screen.active_bindings.values():
            b = active.binding
            if not b.show or not b.description:
                continue
            ident = b.id or b.action
            if ident in seen or self.here_already(screen, b.action):
                continue
            seen.add(ident)
            press = b.key.split(",")[0].strip()
            items.append(Item(press, key_of(b), active.enabled, ORDER.get(ident, 99)))
        enter = ENTER.get(getattr(screen, "HELP_NAME", ""))
        if enter is not None:
            items.append(Item("enter", enter, True, ORDER["go-watch"] - 1))
        new = tuple(sorted(items, key=lambda i: i.order))
        if new != self.items:
            self.items = new
            self.refresh()

    def here_already(self, screen: Screen, action: str) -> bool:
        """'1 watch' on the watch list itself: the key would go where the user is."""
        app = self.app
        return action == f"go({app.current_mode!r})" and screen is app.screen_stack[0]

    def render(self) -> Text:
        kept, hidden = fit(list(self.items), self.size.width)
        styles: dict[str, Style | str] = {
            name: self.get_component_rich_style(f"keystrip--{name}", partial=True)
            for name in ("group", "key", "off")
        }
        text, self.spans = compose_line(kept, hidden, styles)
        return text

    def visible_keys(self) -> list[str]:
        """The keys on show as the help writes them (for tests and the walk)."""
        kept, _ = fit(list(self.items), self.size.width)
        return [i.key.shown for i in kept]

    def on_click(self, event: events.Click) -> None:
        for start, end, press in self.spans:
            if start <= event.x < end:
                event.stop()
                self.app.simulate_key(press)
                return
