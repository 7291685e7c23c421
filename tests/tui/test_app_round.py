"""The round screen: readings entered one after another, a skip kept with its reason."""

from __future__ import annotations

from textual.widgets import Input, Static

from store.db.book import open_book
from store.ledger.journal import read
from store.rounds import parse_skip
from tests.kit.plant import count_entries, settle
from tui.screens.ask import AskScreen
from tui.screens.round_sheet import RoundScreen
from tui.screens.watch import WatchScreen


async def _round(pilot, following: bool = True) -> RoundScreen:
    await settle(pilot, WatchScreen)
    await pilot.press("4")
    await settle(pilot, RoundScreen)
    if following:  # the demo's clock stands near the end of a shift: the next one has more
        await pilot.press("ctrl+n")
        await settle(pilot, RoundScreen)
    return pilot.app.screen


async def test_enter_saves_each_reading_and_moves_on(demo_app):
    app = demo_app()
    before = count_entries(demo_app.path, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _round(pilot)
        stops = screen.plan.stops
        assert len(stops) >= 2
        # walking order: unit, then position
        assert [(s.unit, s.filter) for s in stops] == sorted((s.unit, s.filter) for s in stops)
        first, second = stops[0], stops[1]
        assert screen.stop() == first and app.focused.id == "round-value"
        await pilot.press(*"2.3", "tab", *"48", "enter")
        await pilot.pause()
        assert screen.stop() == second  # moved on
        assert screen.done[first.filter.upper()].startswith("✓")
        # a value that is no ΔP: one line, nothing saved, the cursor stays
        await pilot.press(*"abc", "enter")
        await pilot.pause()
        assert screen.stop() == second
        assert "Not saved" in str(screen.query_one("#round-msg", Static).render())
        assert screen.query_one("#round-value", Input).value == "abc"
    assert count_entries(demo_app.path, "reading") == before + 1
    with open_book(demo_app.path, create=False) as book:
        saved = read(book, kinds=["reading"], filter=first.filter, newest_first=True, limit=1)[0]
    assert saved.dp_bar == 2.3 and saved.temp_c == 48.0  # the demo's prefs: bar, °C


async def test_a_skip_is_kept_as_a_note_with_its_reason(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _round(pilot)
        first = screen.stop()
        await pilot.press("ctrl+o")
        await pilot.pause()
        assert isinstance(app.screen, AskScreen)
        await pilot.press("enter")  # no reason: refused, nothing written
        await pilot.pause()
        assert isinstance(app.screen, AskScreen)
        await pilot.press(*"no access", "enter")
        await pilot.pause()
        assert app.screen is screen
        assert screen.done[first.filter.upper()] == "skipped"
        assert screen.stop() != first
    with open_book(demo_app.path, create=False) as book:
        notes = [parse_skip(e.note) for e in read(book, kinds=["note"])]
    assert (first.filter, "no access") in notes


async def test_esc_leaves_the_round_and_what_was_typed_waits(demo_app):
    # digits go into the round's fields, so the `1` of every other screen cannot lead back
    app = demo_app()
    before = count_entries(demo_app.path, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        screen = await _round(pilot)
        await pilot.press(*"1.7")
        await pilot.press("escape")
        await settle(pilot, WatchScreen)
        assert isinstance(app.screen, WatchScreen)
        await pilot.press("4")
        await settle(pilot, RoundScreen)
        assert app.screen is screen
        assert screen.query_one("#round-value", Input).value == "1.7"
    assert count_entries(demo_app.path, "reading") == before  # leaving saves nothing
