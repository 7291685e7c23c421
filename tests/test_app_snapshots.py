"""SVG snapshots of the key screens on the demo plant at 80×24 (frozen clock, fixed prefs and
theme, no cursor blink). The README shows the watch list and the filter sheet."""

from __future__ import annotations

import pytest

from store.book import open_book
from store.demo import create_demo
from tests.test_app_plant import settle, write_prefs
from tui.app import SumpbookApp
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.watch import WatchScreen

SIZE = (80, 24)


@pytest.fixture
def demo_app(tmp_path, monkeypatch):
    """A fresh app on a fresh copy of the demo plant; the demo book is frozen in time."""
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="AK")))
    path = tmp_path / "demo.db"
    create_demo(path).close()
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())
    return lambda: SumpbookApp(open_book(path), cursor_blink=False)


async def _loaded(pilot) -> None:
    await settle(pilot, WatchScreen)


def test_watch_list(snap_compare, demo_app):
    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=_loaded)


def test_filter_sheet(snap_compare, demo_app):
    async def open_sheet(pilot) -> None:
        await settle(pilot, WatchScreen)
        pilot.app.open_sheet("filter", "D2-R", "DCC-2")
        await settle(pilot, FilterSheetScreen)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_sheet)


def test_reading_form(snap_compare, demo_app):
    async def open_form(pilot) -> None:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"D2-R", "enter", *"2.5")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_form)
