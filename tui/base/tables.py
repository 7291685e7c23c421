"""A rich Table that draws the usual command-line table itself, for speed on a big plant.

rich's Table wraps every cell in a Padding, measures it, word-wraps it and splits and crops its
lines: for the thousand rows of a big plant's watch list that is most of `sumpbook status`.
`LeanTable` gives the same characters and styles (the same segments) for the common case and
leaves everything else to rich:

* measuring: a one-line `Text` cell is measured from its plain text (its longest word and its
  whole length), other cells by rich; rich then sets the column widths from these as always
  (a table too wide for the console is collapsed and its cells wrapped, as before);
* drawing: a one-line `Text` cell that fits its column, left-justified, is drawn as rich would
  (a space either side, the text padded to the column); any other cell is drawn by rich, once
  for all the Text cells alike (same text, styles, column and width);
* tables of another shape (no header, a footer, lines between rows, sections, no box, other
  padding, collapsed padding) are measured and drawn by rich alone.

It overrides two of rich's private methods (`_measure_column`, `_render`) and reads a column's
cells (`Column._cells`): tests/cli/test_lean_table.py holds the two drawings equal, segment for
segment, on the installed rich, and fails when a new rich draws otherwise. Where the installed
rich no longer has those parts as written against (`RICH_AS_KNOWN`, checked once at import),
LeanTable is rich's Table and nothing else: slower, never broken.
"""

from __future__ import annotations

import inspect
import re
from typing import TYPE_CHECKING

from rich.cells import cell_len
from rich.measure import Measurement
from rich.padding import Padding
from rich.segment import Segment
from rich.style import Style
from rich.table import Column, Table
from rich.text import Text

if TYPE_CHECKING:
    from rich.console import Console, ConsoleOptions, RenderResult


def _rich_as_known() -> bool:
    """Whether rich's private parts that LeanTable overrides and reads are there as written
    against (rich 13.7 to 15): the two methods with these parameters, a column's cells."""
    try:
        render = list(inspect.signature(Table._render).parameters)
        measure = list(inspect.signature(Table._measure_column).parameters)
        return (
            render == ["self", "console", "options", "widths"]
            and measure == ["self", "console", "options", "column"]
            and isinstance(Column()._cells, list)
        )
    except (AttributeError, TypeError, ValueError):
        return False


RICH_AS_KNOWN = _rich_as_known()
CELL_PADDING = (0, 1, 0, 1)  # rich's default: one space left and right, none above or below
# Characters that break a text into lines for rich's measuring (str.splitlines) or that rich
# expands (tabs): a text holding one is measured and drawn by rich.
_NOT_ONE_LINE = re.compile("[\n\r\t\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029]")
_NULL = Style.null()
_LINES = Text("\n")  # what rich joins a cell's lines with


def _one_line(cell: object) -> Text | None:
    """The cell as a Text that rich would draw on one line padded on the right, else None."""
    if type(cell) is not Text:
        return None
    if cell.end != "\n":
        return None
    if _NOT_ONE_LINE.search(cell.plain):
        return None
    return cell


def _drawing_key(cell: object, column, width: int, style: Style) -> tuple | None:  # noqa: ANN001
    """All that rich's drawing of a Text cell depends on, or None for another kind of cell."""
    if type(cell) is not Text:
        return None
    text: Text = cell
    return (
        text.plain,
        text.style,
        tuple(text.spans),
        text.justify,
        text.overflow,
        text.no_wrap,
        text.end,
        text.tab_size,
        width,
        column.justify,
        column.no_wrap,
        column.overflow,
        column.highlight,
        style,
    )


class LeanTable(Table):
    """rich.table.Table, faster on many rows: see the module's docstring."""

    def _simple(self) -> bool:
        """Padding, box and rows of the kind drawn here (and a rich it knows how to)."""
        return (
            RICH_AS_KNOWN
            and self.padding == CELL_PADDING
            and not self.collapse_padding
            and self.pad_edge
            and self.box is not None
            and self.show_header
            and not self.show_footer
            and not self.show_lines
            and not self.leading
            and not any(row.end_section for row in self.rows)
        )

    def _measure_column(
        self,
        console: Console,
        options: ConsoleOptions,
        column,  # noqa: ANN001 - rich.table.Column
    ) -> Measurement:
        """The narrowest and widest the column can be, as rich measures it, with the one-line
        Text cells measured from their plain text (longest word, whole text)."""
        max_width = options.max_width
        if not self._simple() or column.width is not None or max_width < 3:
            return super()._measure_column(console, options, column)
        pad = CELL_PADDING[1] + CELL_PADDING[3]
        room = max_width - pad  # for the text inside the padding
        narrowest = widest = 0
        others: list[object] = [column.header]
        for cell in column._cells:
            text = _one_line(cell)
            if text is None:
                others.append(cell)
                continue
            plain = text.plain
            whole = cell_len(plain)
            if whole < 1:
                continue  # an empty cell measures (0, 0) inside its padding
            words = plain.split()
            longest = max(map(cell_len, words)) if words else whole
            narrowest = max(narrowest, min(longest, whole, room))
            widest = max(widest, min(whole, room))
        narrowest, widest = min(narrowest + pad, max_width), min(widest + pad, max_width)
        for cell in others:
            low, high = Measurement.get(console, options, Padding(cell, CELL_PADDING))  # type: ignore[arg-type]
            narrowest, widest = max(narrowest, low), max(widest, high)
        return (
            Measurement(narrowest, widest)
            .with_maximum(max_width)
            .clamp(
                None if column.min_width is None else column.min_width + pad,
                None if column.max_width is None else column.max_width + pad,
            )
        )

    def _render(self, console: Console, options: ConsoleOptions, widths: list[int]) -> RenderResult:
        if not self._simple():
            yield from super()._render(console, options, widths)
            return
        get_style = console.get_style
        border = get_style(self.style or "") + get_style(self.border_style or "")
        box = self.box.substitute(  # type: ignore[union-attr]
            options, safe=self.safe_box if self.safe_box is not None else console.safe_box
        )
        new_line = Segment.line()
        edge = self.show_edge
        if edge:
            yield Segment(box.get_top(widths), border)
            yield new_line
        columns = self.columns
        head_style = get_style(self.header_style or "")
        heads = [(head_style + get_style(c.header_style), c.header) for c in columns]
        body_styles = [get_style(c.style or "") for c in columns]
        count = len(self.rows)
        edges = (
            (box.head_left, box.head_vertical, box.head_right),
            (box.mid_left, box.mid_vertical, box.mid_right),
            (box.foot_left, box.foot_vertical, box.foot_right),
        )
        # A cell rich draws (wrapped, mostly) is drawn once for all the cells like it: a
        # plant's tables repeat their kinds, limits and flags down a column. Nothing changes
        # the lines drawn afterwards (rich's shaping copies them).
        drawings: dict[tuple, list[list[Segment]]] = {}
        for index in range(count + 1):
            if index == 0:  # the header
                row_style = _NULL
                cells = heads
                left, divider, right = edges[0]
            else:
                row_style = get_style(self.get_row_style(console, index - 1))
                cells = [
                    (style + row_style, column._cells[index - 1])
                    for style, column in zip(body_styles, columns, strict=True)
                ]
                left, divider, right = edges[2 if index == count else 1]
            if divider.strip():
                divider_segment = Segment(divider, border)
            else:  # a blank divider takes the row's background, as rich draws it
                divider_segment = Segment(divider, row_style.background_style + border)
            lines = []
            quick = []  # whether each cell was drawn here, exactly as wide as its column
            for column, width, (style, cell) in zip(columns, widths, cells, strict=True):
                line = self._quick_line(console, column, width, style, cell)
                quick.append(line is not None)
                if line is not None:
                    lines.append([line])
                    continue
                key = _drawing_key(cell, column, width, style)
                drawn = drawings.get(key) if key is not None else None
                if drawn is None:
                    drawn = self._rich_lines(console, options, column, width, style, cell)
                    if key is not None:
                        drawings[key] = drawn
                lines.append(drawn)
            tallest = max(len(cell_lines) for cell_lines in lines)  # 0 if no cell drew a line
            height = max(1, tallest)
            if height > 1 or not all(quick):  # rich's shaping: as tall and wide as the row
                lines = [
                    cell_lines
                    if is_quick and height == 1
                    else self._shaped(cell_lines, cell, column, width, style, tallest, index == 0)
                    for cell_lines, is_quick, column, width, (style, cell) in zip(
                        lines, quick, columns, widths, cells, strict=True
                    )
                ]
            for line_no in range(height):
                if edge:
                    yield Segment(left, border)
                for column_no, cell_lines in enumerate(lines):
                    if column_no:
                        yield divider_segment
                    yield from cell_lines[line_no]
                if edge:
                    yield Segment(right, border)
                yield new_line
            if index == 0:
                yield Segment(box.get_row(widths, "head", edge=edge), border)
                yield new_line
        if edge:
            yield Segment(box.get_bottom(widths), border)
            yield new_line

    @staticmethod
    def _quick_line(
        console: Console,
        column,  # noqa: ANN001 - rich.table.Column
        width: int,
        style: Style,
        cell: object,
    ) -> list[Segment] | None:
        """A one-line, left-justified Text that fits the column, drawn as rich draws it (a
        space, the text padded to the column, a space); None for any other cell."""
        text = _one_line(cell)
        if (
            text is None
            or (text.justify or column.justify) != "left"
            or (text.overflow or column.overflow) == "ignore"  # "ignore": rich pads nothing
        ):
            return None
        inner = width - CELL_PADDING[1] - CELL_PADDING[3]
        plain = text.plain
        room = inner - cell_len(plain)
        # rich draws: a column narrower than its padding; a text with more characters than
        # cells here (combining accents), as rich's wrapping trims trailing spaces by count
        if room < 0 or inner < 1 or len(plain) > inner:
            return None
        # widths that do not add up (joiners, emoji selectors) are left to rich
        if text.spans or text.style:
            filled = text.copy()
            filled.pad_right(room)
            # joined as rich joins a cell's lines: the text's own style becomes a span
            body = list(_LINES.join([filled]).render(console))
            if sum(cell_len(part.text) for part in body) != inner:
                return None
            if style:
                body = [Segment(part, style + part_style) for part, part_style, _ in body]
        else:
            filled_plain = plain + " " * room
            if cell_len(filled_plain) != inner:
                return None
            body = [Segment(filled_plain, style if style else None)]
        side = Segment(" ", style if style else _NULL)
        return [side, *body, side]

    @staticmethod
    def _rich_lines(
        console: Console,
        options: ConsoleOptions,
        column,  # noqa: ANN001 - rich.table.Column
        width: int,
        style: Style,
        cell: object,
    ) -> list[list[Segment]]:
        """The cell's lines drawn by rich, padded as rich's Table pads it."""
        cell_options = options.update(
            width=width,
            justify=column.justify,
            no_wrap=column.no_wrap,
            overflow=column.overflow,
            height=None,
            highlight=column.highlight,
        )
        return console.render_lines(Padding(cell, CELL_PADDING), cell_options, style=style)  # type: ignore[arg-type]

    @staticmethod
    def _shaped(
        lines: list[list[Segment]],
        cell: object,
        column,  # noqa: ANN001 - rich.table.Column
        width: int,
        style: Style,
        tallest: int,
        header: bool,
    ) -> list[list[Segment]]:
        """A cell's lines made as tall as the row's tallest cell (filled with the cell's style)
        and at least one line (a blank line unstyled, as rich fills it), each as wide as the
        column: the header at the bottom, others where the cell or its column asks (top by
        default)."""
        vertical = "bottom" if header else getattr(cell, "vertical", None) or column.vertical
        if vertical == "top":
            aligned = Segment.align_top(lines, width, tallest, style)
        elif vertical == "middle":
            aligned = Segment.align_middle(lines, width, tallest, style)
        else:
            aligned = Segment.align_bottom(lines, width, tallest, style)
        return Segment.set_shape(aligned, width, max(1, tallest))
