"""A table of rows that never scrolls sideways: the columns that fit the width whole are
shown, in the order given (most important first), and the rest give way; one column may be
named to take what room is left, its longer cells ending in '…'. Home and End go to the
first and the last row. Column widths follow what is shown now, so they shrink again when
a long cell goes away (a voided entry, a cleared flag) or the unit of measure changes."""

from __future__ import annotations

from collections.abc import Sequence

from rich.cells import cell_len
from rich.text import Text
from textual import events
from textual.binding import Binding
from textual.widgets import DataTable

Row = tuple[str, Sequence[Text]]  # (row key, one cell per column)


class Cell(Text):
    """A cell as the table holds it: a `Text` that does not measure itself. Every column's
    width is chosen by `choose_columns` and given to DataTable, which uses it and never the
    widths it measures; but it measures every cell of every new row all the same, unless the
    cell has nothing to measure with (`textual.render.measure` then takes its default). On a
    plant's watch list (about 9,700 cells) that measuring was a fifth of the first paint."""

    __slots__ = ()
    __rich_measure__ = None  # type: ignore[assignment]

    @classmethod
    def of(cls, text: Text) -> Cell:
        """A copy of `text` as a cell. Rows built of cells are shown as they are."""
        cell = cls(text.plain, style=text.style, justify=text.justify, overflow=text.overflow,
                   no_wrap=text.no_wrap, end=text.end, tab_size=text.tab_size)  # fmt: skip
        cell._spans[:] = text._spans
        return cell


# Entries as the shift log and the unit sheet list them; What takes the rest of the line.
ENTRY_COLUMNS = [
    ("Time", "time"),
    ("Kind", "kind"),
    ("Target", "target"),
    ("By", "by"),
    ("Id", "id"),
    ("What", "what"),
]


def choose_columns(
    headers: Sequence[str],
    rows: Sequence[Row],
    width: int,
    pad: int,
    flexible: int | None,
    flex_min: int = 10_000,
) -> tuple[list[int], list[int]]:
    """Which columns fit `width` whole (indexes, in order) and the width of each. Columns
    are taken in order until one does not fit. The flexible one counts as `flex_min` wide
    (or its own width, if less) and gets what room is left at the end; if even that does
    not fit, it is the last one taken and gets the rest of the line."""
    natural = [
        max([cell_len(h), *(cell_len(r[1][i].plain) for r in rows)]) for i, h in enumerate(headers)
    ]
    chosen: list[int] = []
    widths: list[int] = []
    used = 0
    for i, w in enumerate(natural):
        if i == flexible:
            w = min(w, max(flex_min, cell_len(headers[i])))
        if used + w + 2 * pad > width and i > 0:
            if i == flexible and used + cell_len(headers[i]) + 2 * pad <= width:
                chosen.append(i)  # what is left of the line; its longer cells end in '…'
                widths.append(width - used - 2 * pad)
                used = width
            break  # the rest give way: a later column never shows when an earlier does not
        chosen.append(i)
        widths.append(w)
        used += w + 2 * pad
    if flexible in chosen:
        at = chosen.index(flexible)
        widths[at] = min(natural[flexible], widths[at] + max(width - used, 0))
    return chosen, widths


class RowTable(DataTable):
    BINDINGS = [
        Binding("home", "first_row", "First row", show=False),
        Binding("end", "last_row", "Last row", show=False),
    ]

    def __init__(
        self, *, flexible: str | None = None, flex_min: int = 10_000, **options: object
    ) -> None:
        options.setdefault("cursor_type", "row")
        super().__init__(**options)  # type: ignore[arg-type]
        self.flexible, self.flex_min = flexible, flex_min
        self.headers: list[tuple[str, str]] = []
        self.rows_shown: list[Row] = []
        self.fitted_width = 0  # the width the columns were last chosen for

    def show(self, headers: Sequence[tuple[str, str]], rows: Sequence[Row]) -> None:
        """Fill the table: `headers` are (label, key) in order of importance."""
        self.headers, self.rows_shown = list(headers), list(rows)
        keep = self.cursor_row if self.row_count else 0
        key = None
        if self.row_count and 0 <= keep < self.row_count:
            key = self.coordinate_to_cell_key(self.cursor_coordinate).row_key.value
        self.clear(columns=True)
        labels = [h[0] for h in self.headers]
        flex = next((i for i, h in enumerate(self.headers) if h[1] == self.flexible), None)
        width = self.size.width or self.app.size.width  # not laid out yet: the screen's
        self.fitted_width = width
        width = max(width - self.scrollbar_room(), 10)
        chosen, widths = choose_columns(
            labels, self.rows_shown, width, self.cell_padding, flex, self.flex_min
        )
        for i, w in zip(chosen, widths, strict=True):
            self.add_column(self.headers[i][0], key=self.headers[i][1], width=w)
        for row_key, cells in self.rows_shown:
            out = []
            for i, w in zip(chosen, widths, strict=True):
                cell = cells[i]
                if cell_len(cell.plain) > w:  # a copy: the row as given is kept for a resize
                    cell = Cell.of(cell)
                    cell.truncate(w, overflow="ellipsis")
                elif type(cell) is not Cell:
                    cell = Cell.of(cell)
                out.append(cell)
            self.add_row(*out, key=row_key)
        if key is not None and key in self.rows:
            self.move_cursor(row=self.get_row_index(key))

    def scrollbar_room(self) -> int:
        """Columns kept free for the vertical scroll bar, shown or not."""
        return self.styles.scrollbar_size_vertical

    def shown_keys(self) -> list[str]:
        return [str(c.key.value) for c in self.columns.values()]

    def on_resize(self, event: events.Resize) -> None:
        if event.size.width == self.fitted_width:
            # Only the height moved (the line under the list wraps to another count of
            # lines): every cell renders as it did. DataTable's own handler would count it
            # as an update and throw away every rendered cell, so the whole visible list
            # was drawn again on such a key.
            event.prevent_default()
        elif self.headers:
            self.show(self.headers, self.rows_shown)  # the columns are chosen again

    def action_first_row(self) -> None:
        if self.row_count:
            self.move_cursor(row=0)
        self.scroll_x = 0

    def action_last_row(self) -> None:
        if self.row_count:
            self.move_cursor(row=self.row_count - 1)
        self.scroll_x = 0
