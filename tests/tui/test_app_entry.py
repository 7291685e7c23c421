"""Entry without wrong data (issue 12): the tag prompt opens only the tag typed, urgent
readings ask first, contradictory forms say so, time fields say the whole reason."""

from __future__ import annotations

from textual.widgets import Input, OptionList, Static

from store.db.book import open_book
from store.ledger import journal
from tests.kit.plant import app_for, count_entries, settle
from tui.forms.confirm import ConfirmScreen
from tui.forms.reading import ReadingForm
from tui.screens.tag_prompt import TagPrompt
from tui.screens.watch import WatchScreen


def text_of(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


async def test_a_near_miss_never_opens_a_form_by_itself(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        for typed in ("p2-pf", "p1rf", "P1-R", "p3-x9"):  # the plant has no P2-PF, P3-X9
            await pilot.press("t", *typed, "enter")
            await pilot.pause()
            prompt = app.screen
            assert isinstance(prompt, TagPrompt), typed  # still asking, no form opened
            assert prompt.query_one(Input).value == typed
            if not prompt.matches:
                assert "unknown tag 'p3-x9'" in text_of(prompt, "#tag-msg")
                await pilot.press("escape")
                continue
            # the candidates are shown and named; an explicit pick opens one
            assert prompt.query_one(OptionList).option_count == len(prompt.matches)
            assert prompt.matches[0].tag in text_of(prompt, "#tag-msg")
            await pilot.press("down", "enter")
            await pilot.pause()
            assert isinstance(app.screen, ReadingForm)
            assert app.screen.query_one("#f-filter", Input).value == prompt.matches[0].tag
            await pilot.press("escape")
            await settle(pilot, WatchScreen)


async def test_a_scanner_burst_opens_the_exact_tag_every_time(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        for typed, tag in [
            ("P2-RF", "P2-RF"),
            ("p1-pf", "P1-PF"),
            ("p1-rf", "P1-RF"),
            ("P2-RF", "P2-RF"),
        ]:
            await pilot.press("t", *typed, "enter")  # every character and Enter, no pause
            await pilot.pause()
            form = app.screen
            assert isinstance(form, ReadingForm)
            assert form.query_one("#f-filter", Input).value == tag
            await pilot.press("escape")
            await settle(pilot, WatchScreen)


def burst(app, keys: str) -> None:
    """Keys as a terminal delivers a fast burst (a scanner, a quick typist): all of them queued
    on the app at once, none handled before the next is routed. Pilot's press waits after
    each key, which hides the order in which keys are routed."""
    from textual import events
    from textual.keys import _character_to_key

    for char in keys:
        app.post_message(events.Key(_character_to_key(char), char))


async def test_a_tab_typed_fast_moves_on_before_the_next_digits(plant):
    # Quick entry: "3.1", Tab, "45" in one burst put 3.145 in ΔP and left the temperature as
    # it was: the Tab was handled after the digits behind it had been routed to ΔP.
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"P1-RF", "enter")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm)
        burst(app, "3.1\t45")
        await pilot.pause()
        assert form.query_one("#f-dp", Input).value == "3.1"
        assert form.query_one("#f-temp", Input).value == "45"


async def test_a_reading_over_the_bypass_asks_first_with_the_caution(plant):
    app = app_for(plant)
    before = count_entries(plant, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        # P1-RF's bypass valve is set to 3.5 bar (tests/kit/plant.py): 3.8 bar is past it
        await pilot.press("t", *"P1-RF", "enter", *"3.8", "enter")
        await pilot.pause()
        asked = app.screen
        assert isinstance(asked, ConfirmScreen)
        caution = text_of(asked, "#caution")
        for words in ("bypass", "UNFILTERED OIL IS PASSING", "site procedures", "maker's manual"):
            assert words in caution
        await pilot.press("n")  # back to the form, what was typed kept, nothing written
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm) and form.query_one("#f-dp", Input).value == "3.8"
        assert count_entries(plant, "reading") == before
        await pilot.press("enter")  # Enter alone on the question does not save
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        await pilot.press("enter")
        await pilot.pause()
        assert app.screen is form and count_entries(plant, "reading") == before
        await pilot.press("ctrl+s", "y")
        await settle(pilot, WatchScreen)
    assert count_entries(plant, "reading") == before + 1


async def test_a_reading_below_the_bypass_saves_without_a_question(plant):
    app = app_for(plant)
    before = count_entries(plant, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"P1-RF", "enter", *"3.4", "enter")  # below 3.5 bar
        await settle(pilot, WatchScreen)
    assert count_entries(plant, "reading") == before + 1


async def test_a_top_up_shows_its_caution_and_an_unfiltered_one_with_a_rating_is_refused(plant):
    app = app_for(plant)
    before = count_entries(plant, "topup")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("topup", "P1")
        await pilot.pause()
        form = app.screen
        # common practice, no source: a reservoir opened on a working machine (hot oil, a
        # pressurised tank) has hazards of its own; no lock-out job, so no tick to save
        assert "TOPPING UP" in text_of(form, "#caution")
        assert "to zero before its cap comes off" in text_of(form, "#caution")
        assert not form.query("#ack")
        form.query_one("#f-volume", Input).value = "5"
        form.query_one("#f-how").value = "unfiltered"
        form.query_one("#f-filtered", Input).value = "3"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert app.screen is form
        assert "unfiltered" in text_of(form, "#form-msg")
        assert app.focused is form.query_one("#f-how")  # the cursor goes to the field at fault
        assert count_entries(plant, "topup") == before
        form.query_one("#f-filtered", Input).value = ""
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
    assert count_entries(plant, "topup") == before + 1


async def test_a_choice_clears_its_stale_mark(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("topup", "P1")
        await pilot.pause()
        form = app.screen
        form.query_one("#f-volume", Input).value = "5"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert "choose one" in text_of(form, "#m-how")
        form.query_one("#f-how").value = "filtered"
        await pilot.pause()
        assert "✗" not in text_of(form, "#m-how")
        # a cross-field refusal puts the cursor on the field at fault
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert app.focused is form.query_one("#f-filtered")
        assert "rating" in text_of(form, "#form-msg")


async def test_time_field_says_the_whole_reason_and_takes_a_bare_clock(plant):
    from datetime import UTC, datetime

    app = app_for(plant)
    before = count_entries(plant, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("reading", "P1-RF")
        await pilot.pause()
        form = app.screen
        field = form.query_one("#f-time", Input)
        # the plant's clock is 2026-05-13 10:00 (UTC zone), see tests/kit/plant.py
        for typed, whole in (
            (
                "2026-11-29 08:00",
                "2026-11-29 08:00 is more than a day after now (2026-05-13 10:00)"
                ": check the time or the clock",
            ),
            ("07:3x", "'07:3x' is not a time: type HH:MM, yesterday HH:MM or 2026-05-13 07:30"),
            ("yesterday 7:3", "'yesterday 7:3' is not a time"),
        ):
            field.value = typed
            await pilot.pause()
            shown = text_of(form, "#m-time").replace("\n", "")
            assert whole in shown, shown
        for typed, said in (
            ("07:30", "today, Wed 13 May 2026 07:30"),
            ("23:00", "yesterday, Tue 12 May 2026 23:00"),  # today's 23:00 is still ahead
            ("yesterday 7:30", "yesterday, Tue 12 May 2026 07:30"),
        ):
            field.value = typed
            await pilot.pause()
            assert text_of(form, "#m-time") == said
        field.value = "7:30"
        form.query_one("#f-dp", Input).value = "1.1"
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
    assert count_entries(plant, "reading") == before + 1
    with open_book(plant, create=False) as book:
        saved = journal.read(book, kinds=["reading"], newest_first=True, limit=1)[0]
    assert saved.at == datetime(2026, 5, 13, 7, 30, tzinfo=UTC)


async def test_focus_on_buttons_and_open_lists_stand_out(plant):
    from textual.widgets import Button, Select
    from textual.widgets._select import SelectOverlay

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("topup", "P1")
        await pilot.pause()
        form = app.screen
        box = form.query_one("#form-box").styles.background
        choice = form.query_one("#f-how", Select)
        choice.focus()
        await pilot.press("enter")
        await pilot.pause()
        overlay = choice.query_one(SelectOverlay)
        assert overlay.display and overlay.styles.background != box  # apart from the labels
        assert overlay.styles.border_top[0]  # and framed
        await pilot.press("escape")
        save = form.query_one("#save", Button)
        before = (save.styles.background, save.styles.text_style)
        save.focus()
        await pilot.pause()
        assert (save.styles.background, save.styles.text_style) != before
        assert save.styles.background != box
