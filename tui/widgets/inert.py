"""The app's last line against escape characters: a Textual line filter that takes every
control character out of what is about to be written to the terminal.

Stored text is made visible where the screens show it (`fmt.shown`, `store.base.text.inert`);
this filter catches whatever reaches a line some other way (a toast, a title, a widget that
gets text straight from the book). Textual counts a control character as zero cells wide,
so removing it leaves the line's layout as it was. Textual's own escape sequences are not in
the segments' text (they are made from styles when the line is written), so none is lost.
"""

from __future__ import annotations

from rich.segment import Segment
from textual.color import Color
from textual.filter import LineFilter

_CONTROLS = dict.fromkeys(
    (*range(0x20), 0x7F, *range(0x80, 0xA0), *range(0x202A, 0x202F), *range(0x2066, 0x206A))
)


class InertLines(LineFilter):
    """Removes C0 and C1 controls, DEL and the bidirectional overrides from every line."""

    def apply(self, segments: list[Segment], background: Color) -> list[Segment]:
        if all(text.isprintable() for text, _, control in segments if not control):
            return segments
        return [
            seg
            if seg.control or seg.text.isprintable()
            else seg._replace(text=seg.text.translate(_CONTROLS))
            for seg in segments
        ]


INERT_LINES = InertLines()
