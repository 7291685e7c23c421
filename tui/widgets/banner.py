"""The line under the header that says plainly when the app shows the demo plant."""

from __future__ import annotations

from textual.widgets import Static

DEMO_TEXT = "DEMO PLANT: what you log here is not kept. Your own: sumpbook --db FILE"


class DemoBanner(Static):
    DEFAULT_CSS = """
    DemoBanner {
        height: 1;
        background: $warning;
        color: $background;
        text-style: bold;
        padding: 0 1;
        display: none;
    }
    DemoBanner.-on { display: block; }
    """

    def __init__(self) -> None:
        super().__init__(DEMO_TEXT, markup=False)

    def on_mount(self) -> None:
        self.watch(self.app, "demo", self.show_demo)

    def show_demo(self, demo: bool) -> None:
        self.set_class(bool(demo), "-on")
