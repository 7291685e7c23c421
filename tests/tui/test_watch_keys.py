"""A key that moves the watch list's cursor: the line under the list follows it, and the
screen is drawn once for it (issue 21, item 4). The line was updated from DataTable's
RowHighlighted message, a turn of the event loop after the table's own refresh, so every key
drew every widget of the screen twice. Counted here as draws of a widget the key does not
touch (the key strip), not timed: how long a key takes is measured by
tests/benchmarks/speed.py."""

from __future__ import annotations

from textual import messages
from textual.app import App, ComposeResult
from textual.widgets import DataTable, Static

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


class _LineUnderAList(App[None]):
    """A list stand-in over a `Wrapped` line of the given height, as the watch list has
    its line under it."""

    def __init__(self, height: str) -> None:
        super().__init__()
        self.height = height

    def compose(self) -> ComposeResult:
        yield Static(id="list")
        yield Wrapped(id="line", max_lines=3)

    def on_mount(self) -> None:
        self.query_one("#list").styles.height = "1fr"
        self.query_one("#line").styles.height = self.height


async def _layouts_on_new_line_counts(height: str, monkeypatch) -> int:
    """How many times the screen is asked to lay itself out again while the line shows
    texts of three lines, one, two and one."""
    app = _LineUnderAList(height)
    async with app.run_test(size=(60, 12)) as pilot:
        line = app.query_one("#line", Wrapped)
        line.show(("one line",))
        await pilot.pause()
        asked: list[object] = []
        post = app.screen.post_message

        def counted(message):
            if isinstance(message, messages.Layout):
                asked.append(message)
            return post(message)

        monkeypatch.setattr(app.screen, "post_message", counted)
        for texts in (("a", "b", "c"), ("one line",), ("x", "y"), ("z",)):
            line.show(*texts)  # each paragraph a line
            await pilot.pause()
        return len(asked)


async def test_a_line_of_fixed_height_does_not_lay_the_screen_out_when_its_line_count_moves(
    monkeypatch,
):
    """The line under the watch list is three lines tall whatever a row's detail holds: a
    row of three lines after one of two laid the whole screen out again (speed.py: 20–35 ms
    of CPU for such a key against 8 for the others). With an auto height the list must
    move, and the screen is laid out again."""
    assert await _layouts_on_new_line_counts("3", monkeypatch) == 0
    assert await _layouts_on_new_line_counts("auto", monkeypatch) > 0
