"""What issue 11 changed, where a technician sees it: the fast-loading flag on the filter sheet,
the hour-meter estimate on the reading form."""

from __future__ import annotations

import re

from textual.widgets import Static

from tests.kit.books import meter_book, pace_book
from tests.kit.plant import app_for, settle, write_prefs
from tui.forms.reading import ReadingForm
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.watch import WatchScreen


async def test_the_filter_sheet_says_how_much_faster_the_element_loads(tmp_path, monkeypatch):
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path)))
    # 650 h against earlier lives of 950-1050 h (tests/store/test_status.py): about 1.5x their pace
    pace_book(tmp_path, 650.0).close()
    app = app_for(tmp_path / "pace.db")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "M2-RF", "M2")
        await settle(pilot, FilterSheetScreen)
        # the sheet wraps its notes to the screen: compare the words, not the line breaks
        notes = " ".join(str(app.screen.query_one("#notes", Static).render()).split())
        assert "FAST LOAD" in notes
        # 1000 / 650 = 1.54, as the forecast of 16 readings makes it
        assert re.search(r"about 1\.[3-7]× the pace of the last 6 elements", notes), notes
        assert "take a fluid sample, check the breather and recent top-ups" in notes


async def test_the_reading_form_offers_the_meter_estimate(tmp_path, monkeypatch):
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path)))
    # meter 1480 h on day 40 at 12 h a day (tests/store/test_status.py); the clock is a day later
    meter_book(tmp_path).close()
    app = app_for(tmp_path / "meter.db")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"M1-R", "enter")
        await settle(pilot, ReadingForm)
        hint = str(app.screen.query_one("#m-hours", Static).render())
        assert hint == "about 1492 (running rate)"
