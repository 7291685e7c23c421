"""A key that moves the watch list's cursor: the line under the list follows it, and the
screen is drawn once for it (issue 21, item 4). The line was updated from DataTable's
RowHighlighted message, a turn of the event loop after the table's own refresh, so every key
drew every widget of the screen twice. Counted here as draws of a widget the key does not
touch (the key strip), not timed: how long a key takes is measured by
tests/benchmarks/speed.py."""

from __future__ import annotations

from textual.widgets import DataTable

from tests.kit.plant import app_for, settle
from tui.screens.watch import WatchScreen
from tui.widgets.keystrip import KeyStrip
from tui.widgets.wrapped import Wrapped


def detail_text(app) -> str:
    return str(app.screen.query_one("#detail", Wrapped).render())


async def test_the_line_under_the_list_follows_the_cursor(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        screen = app.screen
        table = screen.query_one(DataTable)
        seen = []
        for key in ("down", "down", "up", "end", "home"):
            await pilot.press(key)
            await pilot.pause()
            row = screen.shown[table.cursor_row]
            assert detail_text(app).startswith(row.tag), (key, detail_text(app))
            seen.append(row.tag)
        assert len(set(seen)) > 2  # the cursor went over several rows


async def test_a_cursor_key_draws_the_screen_once(plant, monkeypatch):
    draws: list[int] = []
    render_lines = KeyStrip.render_lines

    def counted(self, crop):
        draws.append(1)
        return render_lines(self, crop)

    monkeypatch.setattr(KeyStrip, "render_lines", counted)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        keys = ["down", "down", "down", "up"]
        await pilot.press("down")  # the first move draws what the cursor had not drawn yet
        await pilot.pause()
        draws.clear()
        for key in keys:
            await pilot.press(key)
            await pilot.pause()
            await pilot.pause()
        assert 0 < len(draws) <= len(keys)


async def test_filling_the_list_works_out_the_line_once(plant, monkeypatch):
    """DataTable sets its cursor again for every row it adds: the line follows the rows the
    cursor moves to, not each setting (on the big book's 1,078 rows that was 1,078 lines
    worked out and drawn on the way to the first paint)."""
    calls: list[int] = []
    show_detail = WatchScreen.show_detail

    def counted(self):
        calls.append(1)
        return show_detail(self)

    monkeypatch.setattr(WatchScreen, "show_detail", counted)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert app.screen.query_one(DataTable).row_count == 5
        calls.clear()
        app.screen.fill()
        await pilot.pause()
        assert len(calls) == 1
