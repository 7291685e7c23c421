"""The app holds the cyclic garbage collector from its load until its list is painted, and
lets it run again then, at the latest after LET_COLLECTOR_RUN_S, and at its end whatever
happened: a process that ran the app (a test session too) never keeps it off. From the paint
on it holds only the full passes, for a pause in the typing, and puts them back at its end."""

from __future__ import annotations

import gc
import time

import pytest

from store.base import collector
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


async def test_full_passes_wait_for_a_pause_in_the_typing_and_come_back_at_the_end(
    demo_app, monkeypatch
):
    """Once the list is painted the collector's full passes are held (the young ones run);
    the app runs a due one when nobody has typed for IDLE_S, from its own timer; a key
    counts as typing; the thresholds are as they were once the app has ended. What a pass of
    each generation is comes from CPython (gc.callbacks, gc.get_count), not from the app."""
    before = gc.get_threshold()
    seen: list[int] = []

    def note(phase: str, info: dict) -> None:
        if phase == "start":
            seen.append(info["generation"])

    app = demo_app()
    gc.callbacks.append(note)
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot, WatchScreen)
            assert gc.get_threshold()[:2] == before[:2] and gc.get_threshold()[2] > before[2]
            app.last_input = time.monotonic() - 60
            await pilot.press("down")
            assert time.monotonic() - app.last_input < 5  # the key is typing
            kept: list[list[int]] = []
            while gc.get_count()[2] < before[2]:  # a full pass is due, as Python counts
                kept.extend([i] for i in range(1000))
            # "idle" made an hour long: the last key is always too recent, however slow the
            # machine, and the timer's looks must leave the due pass waiting
            monkeypatch.setattr(collector, "IDLE_S", 3600.0)
            seen.clear()
            await pilot.pause(3 * app_module.IDLE_CHECK_S)
            assert 2 not in seen
            app.last_input = time.monotonic() - 7200
            for _ in range(100):  # the app's timer finds it idle (5 s at most)
                if 2 in seen:
                    break
                await pilot.pause(0.05)
            assert 2 in seen and len(kept) > 0
    finally:
        gc.callbacks.remove(note)
    assert gc.get_threshold() == before
