"""A save runs off the UI loop (its first write's whole-file check can take seconds on a big
book): the form says it is saving and takes no second save meanwhile. After it, the app shows
the status the save kept (an EntrySaved message), without fitting the forecast again."""

from __future__ import annotations

import os
import shutil
import sqlite3

from textual.widgets import Input

from store import record
from store.base.session import from_environ
from store.db.book import open_book
from store.derived import statuscache
from store.ledger.entries import Reading
from tests.kit.plant import app_for, count_entries, settle
from tui.forms.reading import ReadingForm
from tui.screens.watch import WatchScreen


async def test_the_form_waits_for_a_save_held_up_by_another_writer_and_takes_no_second(plant):
    app = app_for(plant)
    before = count_entries(plant, "reading")
    other = sqlite3.connect(plant, timeout=0)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("reading", "P1-RF")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm)
        form.query_one("#f-dp", Input).value = "1.7"
        other.execute("BEGIN IMMEDIATE")  # another program holds the write lock
        try:
            await pilot.press("ctrl+s")
            await pilot.pause()
            # the loop is free: the form answers keys while its save waits for the lock
            assert form.saving and "Saving" in str(form.query_one("#form-msg").render())
            await pilot.press("ctrl+s")
            await pilot.pause()
            assert "not a second save" in str(form.query_one("#form-msg").render())
            await pilot.press("escape")  # nor called back: it lands, then the form goes
            await pilot.pause()
            assert app.screen is form and "called back" in str(form.query_one("#form-msg").render())
        finally:
            other.execute("COMMIT")
            other.close()
        # The save lands and its callback closes the form, which may mark the save's worker
        # cancelled before the worker has noted its own end (its work done all the same):
        # settle waits for every worker and takes that as an end, as it takes a failure.
        await settle(pilot, WatchScreen)
    assert count_entries(plant, "reading") == before + 1


def counting(monkeypatch, tag: str) -> list[int]:
    """How many times a status of filter `tag` is computed from its entries (each fits its
    forecast); other filters' (a list read computing rows it finds stale) are not counted."""
    calls = [0]
    compute = statuscache.status_from

    def counted(ctx, *args, **kwargs):
        calls[0] += ctx.position.tag == tag
        return compute(ctx, *args, **kwargs)

    monkeypatch.setattr(statuscache, "status_from", counted)
    return calls


async def test_after_a_save_the_app_shows_the_kept_status_without_fitting_again(
    plant, tmp_path, monkeypatch
):
    # the fits a save itself makes, on a copy of the same book (issue 22: the app fitted the
    # forecast again after each save, to show the status the save had just kept)
    copy = tmp_path / "copy.db"
    shutil.copy(plant, copy)
    calls = counting(monkeypatch, "P1-RF")
    session = from_environ(os.environ)
    with open_book(copy, create=False, clock=session.clock) as book:
        record.preload()
        calls[0] = 0
        kept = record.save(book, Reading(filter="P1-RF", dp_bar=1.7, by="AB"))
    in_the_save = calls[0]
    assert in_the_save == 1 and kept.status is not None

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        record.preload()
        calls[0] = 0
        app.open_form("reading", "P1-RF")
        await pilot.pause()
        app.screen.query_one("#f-dp", Input).value = "1.7"
        await pilot.press("ctrl+s")
        await app.workers.wait_for_complete()
        await settle(pilot, WatchScreen)
        assert calls[0] == in_the_save
        shown = app.statuses["P1-RF"]
    assert shown.state == kept.status.state and shown.flags == kept.status.flags
    assert "P1-RF:" in app.last_message
