"""A Static whose lines wrap where the text allows it: between phrases (' · '), or under
their own indent for lines laid out by hand. It wraps again when its width changes."""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text
from textual import events
from textual.widgets import Static

from tui.widgets.fmt import hanging_lines, phrase_lines

Block = Sequence[str | Text] | str | Text  # one paragraph: its phrases, or one phrase


class Wrapped(Static):
    def __init__(
        self, text: str = "", *, hanging: bool = False, max_lines: int = 0, **options: object
    ) -> None:
        super().__init__("", markup=False, **options)  # type: ignore[arg-type]
        self.hanging = hanging
        self.max_lines = max_lines  # more are left out, the last line shown ends in '…'
        self.blocks: list[Block] = [text] if text else []
        self.wrapped_at = 0
        self.line_count = -1  # lines shown by the last `show` (-1: none yet)

    def on_mount(self) -> None:
        if self.blocks:
            self.show(*self.blocks)

    def show(self, *blocks: Block) -> None:
        """Show these paragraphs, each its phrases (empty ones are left out)."""
        self.blocks = list(blocks)
        width = self.content_region.width or self.app.size.width - 4
        self.wrapped_at = width
        lines: list[Text] = []
        for block in self.blocks:
            if self.hanging:
                lines += hanging_lines(self.app.console, width, str(block))
            elif isinstance(block, (str, Text)):
                lines += phrase_lines(self.app.console, width, [block])
            else:
                lines += phrase_lines(self.app.console, width, block)
        if self.max_lines and len(lines) > self.max_lines:
            lines = lines[: self.max_lines]
            last = lines[-1]
            last.truncate(width - 1)
            lines[-1] = last + Text("…")
        # As many lines as before, each fitting the width, or a size set by the style sheet
        # (the line under the watch list is 3 lines tall whatever it holds): the widget keeps
        # its size, so only it is drawn again, not the screen laid out (and the list beside
        # it redrawn) on every key that changes the text.
        fits = all(line.cell_len <= width for line in lines)
        same_size = fits and len(lines) == self.line_count
        self.line_count = len(lines) if fits else -1
        self.update(Text("\n").join(lines), layout=not same_size and self.sized_by_text())

    def sized_by_text(self) -> bool:
        """Whether the widget's size follows what it shows (an auto height or width)."""
        height, width = self.styles.height, self.styles.width
        return height is None or height.is_auto or (width is not None and width.is_auto)

    def on_resize(self, event: events.Resize) -> None:
        if self.blocks and self.content_region.width != self.wrapped_at:
            self.show(*self.blocks)

    def show_text(self, text: str) -> None:
        """Show lines whose phrases are joined by ' · '."""
        self.show(*(tuple(line.split(" · ")) for line in text.split("\n")))
