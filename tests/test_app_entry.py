"""Entry without wrong data (issue 12): the tag prompt opens only the tag typed, urgent
readings ask first, contradictory forms say so, time fields say the whole reason."""

from __future__ import annotations

import pytest
from textual.widgets import Input, OptionList, Static

from tests import test_app_plant as kit
from tests.test_app_plant import make_app, settle
from tui.forms.reading import ReadingForm
from tui.screens.tag_prompt import TagPrompt
from tui.screens.watch import WatchScreen

plant = kit.plant  # the invented plant (a fixture)


def text_of(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


@pytest.mark.parametrize("typed", ["p2-pf", "p3-x9", "p1rf", "P1-R"])
async def test_a_near_miss_never_opens_a_form_by_itself(plant, typed):
    app = make_app(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *typed, "enter")
        await pilot.pause()
        prompt = app.screen
        assert isinstance(prompt, TagPrompt)  # still asking, no form opened
        assert prompt.query_one(Input).value == typed
        if prompt.matches:  # the candidates are shown and named
            assert prompt.query_one(OptionList).option_count == len(prompt.matches)
            assert prompt.matches[0].tag in text_of(prompt, "#tag-msg")
            await pilot.press("down", "enter")  # an explicit pick opens it
            await pilot.pause()
            assert isinstance(app.screen, ReadingForm)
            assert app.screen.query_one("#f-filter", Input).value == prompt.matches[0].tag


@pytest.mark.parametrize("typed,tag", [("P2-RF", "P2-RF"), ("p1-pf", "P1-PF"), ("p1-rf", "P1-RF")])
async def test_a_scanner_burst_opens_the_exact_tag_every_time(plant, typed, tag):
    app = make_app(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        for _ in range(3):
            await pilot.press("t", *typed, "enter")  # every character and Enter, no pause
            await pilot.pause()
            form = app.screen
            assert isinstance(form, ReadingForm)
            assert form.query_one("#f-filter", Input).value == tag
            await pilot.press("escape")
            await settle(pilot, WatchScreen)
