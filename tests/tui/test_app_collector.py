"""The app holds the cyclic garbage collector from its load until its list is painted, and
lets it run again then, at the latest after LET_COLLECTOR_RUN_S, and at its end whatever
happened: a process that ran the app (a test session too) never keeps it off."""

from __future__ import annotations

import gc

import pytest

from tests.kit.plant import settle
from tui import app as app_module
from tui.app import SumpbookApp
from tui.screens.watch import WatchScreen


async def test_held_until_the_list_is_painted_then_running(demo_app, monkeypatch):
    seen: list[bool] = []
    real = SumpbookApp.first_paint_done

    def spy(self):  # noqa: ANN001
        seen.append(gc.isenabled())
        real(self)
        seen.append(gc.isenabled())

    monkeypatch.setattr(SumpbookApp, "first_paint_done", spy)
    assert gc.isenabled()
    app = demo_app()
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, WatchScreen)
        assert seen[:2] == [False, True]  # held up to the paint, running after it
        assert gc.isenabled()
    assert gc.isenabled()


async def test_an_app_that_ends_before_its_list_is_painted_lets_it_run(demo_app, monkeypatch):
    monkeypatch.setattr(SumpbookApp, "first_paint_done", lambda self: None)
    app = demo_app()
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        assert not gc.isenabled()  # never painted: still held while it runs
    assert gc.isenabled()


async def test_held_no_longer_than_the_limit(demo_app, monkeypatch):
    monkeypatch.setattr(SumpbookApp, "first_paint_done", lambda self: None)
    monkeypatch.setattr(app_module, "LET_COLLECTOR_RUN_S", 0.2)
    app = demo_app()
    async with app.run_test(size=(100, 30)) as pilot:
        for _ in range(100):  # the timer's 0.2 s, however busy the machine (5 s at most)
            if gc.isenabled():
                break
            await pilot.pause(0.05)
        assert gc.isenabled()


async def test_a_collector_found_off_is_left_off(demo_app):
    gc.disable()
    try:
        app = demo_app()
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot, WatchScreen)
            assert not gc.isenabled()
        assert not gc.isenabled()
    finally:
        gc.enable()


@pytest.fixture(autouse=True)
def _collector_on_after():
    yield
    if not gc.isenabled():  # a failed test must not leave the rest of the session without it
        gc.enable()
        pytest.fail("the collector was left off")
