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
from textual.cache import LRUCache
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


# The LRU caches of a DataTable that its clear() empties (DataTable._clear_caches); only
# those may be unlinked first. tests/tui/test_rowtable.py counts what a fill leaves.
EMPTIED_BY_CLEAR = (
    "_row_render_cache",
    "_cell_render_cache",
    "_row_renderable_cache",
    "_line_cache",
    "_offset_cache",
    "_ordered_row_cache",
)


def _unlink(cache: LRUCache) -> None:
    """Break the links of Textual's LRU cache, to be emptied next. It keeps its entries in a
    ring of links, and emptying it lets go of the ring whole: a cycle that only a pass of
    the cyclic collector frees, with all that its entries hold (on a big plant's watch list
    some 25,000 objects each time the table is filled anew, and a pass of 30–40 ms every
    two or three fills). With every link broken first, it all goes at once."""
    links = getattr(cache, "_cache", None)
    if isinstance(links, dict):
        for link in links.values():
            if type(link) is list:
                link.clear()


def same_cell(a: Text, b: Text) -> bool:
    """Whether two cells show alike: their text, styles and how they are laid out."""
    return (
        a.plain == b.plain
        and a.style == b.style
        and a.spans == b.spans
        and (a.justify, a.overflow, a.no_wrap, a.end) == (b.justify, b.overflow, b.no_wrap, b.end)
    )


def _kept(cell: Text, held: Text) -> Text:
    """The cell to hold: the one held if it shows alike."""
    return held if cell is held or same_cell(cell, held) else cell


def _fitted(cells: Sequence[Text], chosen: list[int], widths: list[int]) -> list[Text]:
    """The cells of the columns shown, as the table holds them: cut to their column's width
    with '…' (a copy: the row as given is kept for a resize), each a `Cell`."""
    out: list[Text] = []
    for i, w in zip(chosen, widths, strict=True):
        cell = cells[i]
        if cell_len(cell.plain) > w:
            cell = Cell.of(cell)
            cell.truncate(w, overflow="ellipsis")
        elif type(cell) is not Cell:
            cell = Cell.of(cell)
        out.append(cell)
    return out


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
        # What the table holds, as it was put in: the columns (label, key, width), each
        # row's cells by its key, and the keys in their order on the screen.
        self._columns_held: list[tuple[str, str, int]] = []
        self._held: dict[str, list[Text]] = {}
        self._order: list[str] = []

    def show(self, headers: Sequence[tuple[str, str]], rows: Sequence[Row]) -> None:
        """Fill the table: `headers` are (label, key) in order of importance. Where the same
        columns are shown at the same widths over the same row keys (a list read again after
        a save: a row or two changed, some moved), only the cells that differ are put in and
        the rows put in their new order; else the table is filled anew."""
        self.headers, self.rows_shown = list(headers), list(rows)
        keep = self.cursor_row if self.row_count else 0
        key = None
        if self.row_count and 0 <= keep < self.row_count:
            key = self.coordinate_to_cell_key(self.cursor_coordinate).row_key.value
        labels = [h[0] for h in self.headers]
        flex = next((i for i, h in enumerate(self.headers) if h[1] == self.flexible), None)
        width = self.size.width or self.app.size.width  # not laid out yet: the screen's
        self.fitted_width = width
        width = max(width - self.scrollbar_room(), 10)
        chosen, widths = choose_columns(
            labels, self.rows_shown, width, self.cell_padding, flex, self.flex_min
        )
        columns = [(*self.headers[i], w) for i, w in zip(chosen, widths, strict=True)]
        fitted = [(k, _fitted(cells, chosen, widths)) for k, cells in self.rows_shown]
        if not self._changed_in_place(columns, fitted):
            self._fill_anew(columns, fitted)
        if key is not None and key in self.rows:
            self.move_cursor(row=self.get_row_index(key))

    def clear(self, columns: bool = False) -> RowTable:
        for name in EMPTIED_BY_CLEAR:
            cache = getattr(self, name, None)
            if isinstance(cache, LRUCache):
                _unlink(cache)  # DataTable's clear empties it next
        self._held, self._order = {}, []
        if columns:
            self._columns_held = []
        super().clear(columns)
        return self

    def _fill_anew(self, columns: list[tuple[str, str, int]], rows: list[Row]) -> None:
        self.clear(columns=True)
        for label, column_key, w in columns:
            self.add_column(label, key=column_key, width=w)
        for row_key, cells in rows:
            self.add_row(*cells, key=row_key)
        self._columns_held = columns
        self._held = {k: list(cells) for k, cells in rows}
        self._order = [k for k, _ in rows]

    def _changed_in_place(self, columns: list[tuple[str, str, int]], rows: list[Row]) -> bool:
        """Put `rows` in over the rows held, cell by cell, if the table can take them so:
        the same columns at the same widths, the same row keys (in any order). False: it
        cannot, nothing was changed. A table filled anew measures and lays out every row
        again (DataTable.add_row, then its dimensions on the next idle); in place, only the
        rows on the screen are drawn again."""
        held = self._held
        if columns != self._columns_held or len(rows) != len(held) or self.row_count != len(held):
            return False
        if any(k not in held for k, _ in rows) or len({k for k, _ in rows}) != len(rows):
            return False
        # each row as it will be held: a cell that shows as the one held stays
        now = {k: [_kept(c, o) for c, o in zip(cells, held[k], strict=True)] for k, cells in rows}
        order = [k for k, _ in rows]
        place = None
        if order != self._order:
            # DataTable's own sort puts the rows in order; it hands its key function a row's
            # cells, the very objects held here: a row is known by their identities.
            place = {tuple(map(id, now[k])): i for i, k in enumerate(order)}
            if len(place) != len(order):
                return False  # two rows of the very same cell objects: filled anew
        keys = [c[1] for c in columns]
        for k, cells in now.items():
            for i, (cell, old) in enumerate(zip(cells, held[k], strict=True)):
                if cell is not old:
                    self.update_cell(k, keys[i], cell)
        self._held = now
        if place is not None:
            self.sort(key=lambda cells: place[tuple(map(id, cells))])
            self._order = order
        return True

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
