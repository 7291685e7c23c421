"""Shop-floor defects found on the demo at 80×24 (issue 23), each driven as a technician would."""

from __future__ import annotations

from textual.widgets import Input, Static

from store import views
from store.db.book import open_book
from tests.kit.plant import count_entries, settle
from tui.forms.reading import ReadingForm
from tui.screens.watch import WatchScreen


def shown(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


async def test_a_decimal_comma_with_three_digits_is_asked_about_not_guessed(demo_app):
    app = demo_app()
    before = count_entries(demo_app.path, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"D2-R", "enter", *"1,250", "ctrl+s")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm)  # not saved: 1.25 bar or 1250?
        assert "1.25 or 1250?" in shown(form, "#m-dp")
        assert form.query_one("#f-dp", Input).value == "1,250"
        form.query_one("#f-dp", Input).value = "1.25"
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
    assert count_entries(demo_app.path, "reading") == before + 1
    with open_book(demo_app.path, create=False) as book:
        d2r = next(f for f in views.watch(book).filters if f.filter == "D2-R")
        assert d2r.dp_bar == 1.25 and "dp-drop" in d2r.flags
