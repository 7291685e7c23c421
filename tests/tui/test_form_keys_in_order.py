"""Keys that arrive together are applied in the order they were typed, and a save takes the
fields as they stood at its key: the form saves what it shows, never a value from before a
key (a Backspace overtaken by the letters after it) or after it (a digit typed after Enter)."""

from __future__ import annotations

import pytest
from textual.widgets import Input

from store.db.book import open_book
from store.ledger import journal
from tests.kit.plant import app_for, burst, count_entries, settle
from tui.forms.reading import ReadingForm
from tui.screens.watch import WatchScreen


def newest_reading(path):
    with open_book(path, create=False) as book:
        return journal.read(book, kinds=["reading"], newest_first=True, limit=1)[0]


async def open_reading(pilot, tag: str = "P1-RF") -> ReadingForm:
    await settle(pilot, WatchScreen)
    await pilot.press("t", *tag, "enter")
    await pilot.pause()
    form = pilot.app.screen
    assert isinstance(form, ReadingForm)
    return form


async def test_a_burst_after_a_refusal_saves_nothing_the_field_does_not_show(plant):
    """Found by hand: '1,250' refused (which was meant?), then Backspace×5, 'abc', ctrl+s sent
    at once saved 1.2 bar: the letters went in before the Backspaces were applied, which then
    cut '1,250abc' to '1,2', and the save read that."""
    app = app_for(plant)
    before = count_entries(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        form = await open_reading(pilot)
        await pilot.press(*"1,250", "ctrl+s")
        assert app.screen is form  # refused: '1,250' reads two ways
        await burst(pilot, *["backspace"] * 5, *"abc", "ctrl+s")
        assert app.screen is form
        assert form.query_one("#f-dp", Input).value == "abc"
    assert count_entries(plant) == before


async def test_a_burst_that_puts_the_value_right_saves_it(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        form = await open_reading(pilot)
        await pilot.press(*"1,250", "ctrl+s")
        await burst(pilot, *["backspace"] * 5, *"1.4", "ctrl+s")
        await settle(pilot, WatchScreen)
        assert form.saved is not None
    assert newest_reading(plant).dp_bar == pytest.approx(1.4)


@pytest.mark.parametrize("save", ["ctrl+s", "enter"])
async def test_keys_typed_after_the_save_key_are_not_saved(plant, save):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await open_reading(pilot)
        await burst(pilot, *"1.4", save, *"7")
        await settle(pilot, WatchScreen)
    assert newest_reading(plant).dp_bar == pytest.approx(1.4)


async def test_a_burst_across_fields_lands_where_it_was_typed(plant):
    """'1.9', Tab, '44', left, backspace, '5', ctrl+s: ΔP 1.9 and a temperature of 54 °C."""
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await open_reading(pilot)
        await burst(pilot, *"1.9", "tab", *"44", "left", "backspace", "5", "ctrl+s")
        await settle(pilot, WatchScreen)
    saved = newest_reading(plant)
    assert saved.dp_bar == pytest.approx(1.9) and saved.temp_c == pytest.approx(54)


async def test_a_round_typed_in_one_burst_saves_each_value_on_its_own_stop(demo_app):
    """'2.3' Enter '2,1' Backspace '4' Enter at once: 2.3 bar on the first stop; what was
    typed after that Enter is the second stop's ('2,4': the Backspace applied where it was
    typed), and the Enter that came while the first was saving is said not taken, so the
    second is saved by the next Enter, never onto the first stop."""
    from tui.screens.round_sheet import RoundScreen

    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("4")
        await settle(pilot, RoundScreen)
        await pilot.press("ctrl+n")  # the next shift's round has more stops on the demo
        await settle(pilot, RoundScreen)
        screen = app.screen
        first, second = screen.plan.stops[:2]
        assert first.gauge and second.gauge
        await burst(pilot, *"2.3", "enter", *"2,1", "backspace", "4", "enter")
        assert screen.done[first.filter.upper()] == "✓ 2.30 bar"
        assert screen.stop() == second
        assert screen.query_one("#round-value", Input).value == "2,4"
        assert "not taken" in str(screen.query_one("#round-msg").render())
        await pilot.press("enter")
        await pilot.pause()
        assert screen.done[second.filter.upper()] == "✓ 2.40 bar"
    with open_book(demo_app.path, create=False) as book:
        for stop, bar in ((first, 2.3), (second, 2.4)):
            read = journal.read(book, kinds=["reading"], filter=stop.filter, newest_first=True)
            assert read[0].dp_bar == pytest.approx(bar)


async def test_a_register_record_saves_what_its_field_shows(plant):
    from tests.kit.plant import register_row

    app = app_for(plant)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, WatchScreen)
        screen = await register_row(pilot, "filters", "P1-RF")
        await pilot.press("e")
        await pilot.pause()
        form = app.screen
        limit = form.query_one("#f-limit_bar", Input)
        limit.focus()
        await pilot.pause()
        await burst(pilot, "end", *["backspace"] * 8, *"2,5", "backspace", "6", "ctrl+s", "9")
        assert app.screen is screen
    with open_book(plant, create=False) as book:
        from store.ledger.register import FilterPosition, get

        assert get(book, FilterPosition, "P1-RF").limit_bar == pytest.approx(2.6)


async def test_enter_in_a_choice_picks_and_a_save_with_its_list_open_is_refused(plant):
    """Enter saves from a text field only: in a choice it opens the list and picks from it.
    A save key that comes while the list is open saves nothing: the pick is on its way."""
    from textual.widgets import Select

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        form = await open_reading(pilot)
        choice = form.query_one("#f-indicator", Select)
        choice.focus()
        await pilot.pause()
        await burst(pilot, "enter", "ctrl+s")
        assert app.screen is form
        assert "close the list" in str(form.query_one("#m-indicator").render())
        choice.focus()
        await pilot.pause()
        await pilot.press("enter", "down", "down", "enter")  # – , clean, dirty
        assert choice.value == "dirty"
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
    saved = newest_reading(plant)
    assert saved.indicator == "dirty" and saved.dp_bar is None
