"""The footer, on two lines when one is too narrow, so that every key of the screen shows."""

from __future__ import annotations

import math

from textual.app import ComposeResult
from textual.screen import Screen
from textual.widgets import Footer

CELL = 8  # columns a key needs, e.g. "o Top-up"


class KeyStrip(Footer):
    DEFAULT_CSS = """
    KeyStrip {
        layout: grid;
        height: auto;
        max-height: 3;
        grid-gutter: 0 0;
    }
    KeyStrip FooterKey { width: 1fr; margin: 0; }
    """

    def __init__(self) -> None:
        super().__init__(compact=True, show_command_palette=False)
        self.shown_keys: tuple[object, ...] | None = None

    def bindings_changed(self, screen: Screen) -> None:
        """Textual's footer rebuilds its keys on every change of focus or screen; this one
        only when the keys it would show differ (a dozen key widgets and their styles cost a
        screen switch more than the rest of it)."""
        keys = (
            self.app.size.width,
            *(
                (b.key, b.action, b.description, enabled, tooltip)
                for _, b, enabled, tooltip in screen.active_bindings.values()
                if b.show
            ),
        )
        if keys == self.shown_keys and self.children:
            return
        self.shown_keys = keys
        super().bindings_changed(screen)

    def compose(self) -> ComposeResult:
        keys = list(super().compose())
        width = max(self.app.size.width, CELL)
        rows = max(1, min(3, math.ceil(len(keys) * CELL / width)))
        self.styles.grid_size_columns = max(1, math.ceil(len(keys) / rows))
        yield from keys
