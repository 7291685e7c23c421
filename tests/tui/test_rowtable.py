"""A table read again over the same rows (the watch list after a save) takes only the cells
that changed and the new order, and shows what a table filled anew shows; a table filled
anew leaves nothing for the cyclic collector (issue 21: the list after a save was filled
anew, about 100 ms of CPU on a big plant, and left some 25,000 objects in cycles behind).
The oracle is DataTable filled from scratch with the same rows (`shown` below), not a figure
of ours; how long a fill takes is not timed here."""

from __future__ import annotations

import gc

from rich.text import Text
from textual.app import App, ComposeResult

from tests.kit.plant import app_for, settle
from tui.screens.watch import WatchScreen
from tui.widgets import rowtable
from tui.widgets.rowtable import Cell, RowTable

HEADERS = [("Tag", "tag"), ("Value", "value"), ("Note", "note")]


def rows_of(values: dict[str, tuple[str, str]], order: list[str]) -> list:
    return [(k, (Cell(k), Text(values[k][0], style="bold"), Cell(values[k][1]))) for k in order]


class OneTable(App):
    def compose(self) -> ComposeResult:
        yield RowTable(id="t", flexible="note")


def shown(table: RowTable) -> list[tuple[str, list[tuple[str, str]]]]:
    """Each row on the screen, top to bottom: its key and its cells' text and style."""
    out = []
    for i in range(table.row_count):
        key = table.coordinate_to_cell_key((i, 0)).row_key.value
        cells = table.get_row_at(i)
        out.append((key, [(c.plain, str(c.style)) for c in cells]))
    return out


async def filled_anew(rows: list) -> list:
    async with OneTable().run_test(size=(60, 20)) as pilot:
        table = pilot.app.query_one(RowTable)
        table.show(HEADERS, rows)
        await pilot.pause()
        return shown(table)


VALUES = {k: (f"{i}.0", f"note {k}") for i, k in enumerate("abcdef")}


async def test_rows_read_again_change_in_place_and_take_their_new_order():
    again = dict(VALUES, c=("9.5", "note c"), e=("4.0", "note E"))
    order = ["f", "c", "a", "b", "e", "d"]
    async with OneTable().run_test(size=(60, 20)) as pilot:
        table = pilot.app.query_one(RowTable)
        table.show(HEADERS, rows_of(VALUES, list("abcdef")))
        await pilot.pause()
        table.move_cursor(row=1)  # on "b"
        row_objects = dict(table.rows)
        table.show(HEADERS, rows_of(again, order))
        await pilot.pause()
        assert shown(table) == await filled_anew(rows_of(again, order))
        assert [k for k, _ in shown(table)] == order
        # in place: DataTable's rows are the ones it had (a fill anew makes new ones)
        assert all(table.rows[k] is row for k, row in row_objects.items())
        assert table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value == "b"
        # a cell that shows alike stays the object the table held
        held = table.get_row("a")
        table.show(HEADERS, rows_of(again, order))
        assert all(x is y for x, y in zip(held, table.get_row("a"), strict=True))


async def test_other_keys_or_widths_fill_the_table_anew():
    async with OneTable().run_test(size=(60, 20)) as pilot:
        table = pilot.app.query_one(RowTable)
        table.show(HEADERS, rows_of(VALUES, list("abcdef")))
        await pilot.pause()
        for values, order in (
            (VALUES, list("abcd")),  # rows gone (a find narrowing the list)
            (dict(VALUES, g=("7.0", "new")), list("gabcdef")),  # a row added
            (dict(VALUES, a=("1234567.0", "note a")), list("abcdef")),  # a wider column
        ):
            table.show(HEADERS, rows_of(values, order))
            await pilot.pause()
            assert shown(table) == await filled_anew(rows_of(values, order))
        assert table.columns["value"].width == len("1234567.0")


async def test_rows_of_the_very_same_cells_reorder_all_the_same():
    same = (Cell("x"), Cell("1"), Cell("n"))  # one set of cell objects for two keys
    first = [("p", same), ("q", same), ("r", (Cell("r"), Cell("2"), Cell("m")))]
    then = [first[2], first[0], first[1]]
    async with OneTable().run_test(size=(60, 20)) as pilot:
        table = pilot.app.query_one(RowTable)
        table.show(HEADERS, first)
        await pilot.pause()
        table.show(HEADERS, then)
        await pilot.pause()
        assert shown(table) == await filled_anew(then)
        assert [k for k, _ in shown(table)] == ["r", "p", "q"]


async def _left_in_cycles(pilot, table: RowTable, rows: list) -> int:
    """What the cyclic collector finds after `rows` are shown and drawn."""
    gc.collect()
    gc.disable()
    try:
        table.show(HEADERS, rows)
        await pilot.pause()
        return gc.collect()
    finally:
        gc.enable()


async def test_a_table_filled_anew_leaves_nothing_in_cycles(monkeypatch):
    many = {f"K{i:03}": (f"{i}.5", f"note {i}") for i in range(300)}
    keys = list(many)
    async with OneTable().run_test(size=(60, 40)) as pilot:
        table = pilot.app.query_one(RowTable)
        table.show(HEADERS, rows_of(many, keys))
        await pilot.pause()
        for _ in range(2):  # drawn over the whole list: its caches hold every row
            table.action_last_row()
            await pilot.pause()
            table.action_first_row()
            await pilot.pause()
        half = await _left_in_cycles(pilot, table, rows_of(many, keys[::2]))  # anew
        whole = await _left_in_cycles(pilot, table, rows_of(many, keys))  # anew
        again = await _left_in_cycles(pilot, table, rows_of(many, keys[::-1]))  # in place
        # what drawing a screen leaves anyway (a few hundred objects), as much filled anew
        assert max(half, whole) < again + 100, (half, whole, again)
        # The control: with DataTable's caches emptied as they are (their links not broken
        # first), the same fill leaves the old rows in cycles, a few objects each.
        monkeypatch.setattr(rowtable, "EMPTIED_BY_CLEAR", ())
        control = await _left_in_cycles(pilot, table, rows_of(many, keys[::3]))
        assert control > again + 3000, (control, again)


# ---- the watch list -------------------------------------------------------------------------


def watch_cells(app) -> dict[str, tuple]:
    table = app.screen.query_one(RowTable)
    return {k: tuple(table.get_row(k)) for k, _ in shown(table)}


async def test_the_watch_list_after_a_save_shows_what_a_fresh_app_shows(plant):
    from store import open_book, record
    from store.ledger.entries import Reading

    app = app_for(plant)
    async with app.run_test(size=(120, 30)) as pilot:
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(RowTable)
        before = watch_cells(app)
        app.book_changed()
        await pilot.press("f5")  # read again, nothing written: every cell kept
        await settle(pilot, WatchScreen)
        kept = [
            x is y for k, row in before.items() for x, y in zip(row, table.get_row(k), strict=True)
        ]
        assert all(kept)
        with open_book(plant, create=False) as book:
            record.log(book, Reading(filter="P2-RF", dp_bar=0.4, temp_c=45.0, by="AB"))
        app.book_changed()
        await pilot.press("f5")
        await settle(pilot, WatchScreen)
        after = shown(table)
        cells = watch_cells(app)
        assert any(x is not y for x, y in zip(before["P2-RF"], cells["P2-RF"], strict=True))
    fresh = app_for(plant)
    async with fresh.run_test(size=(120, 30)) as pilot:
        await settle(pilot, WatchScreen)
        assert after == shown(fresh.screen.query_one(RowTable))
