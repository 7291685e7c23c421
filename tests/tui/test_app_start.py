"""Starting the app (issue 12): with no logbook, a throw-away demo that says so and keeps
nothing; with `--db NEW.db`, the offer to create that logbook with the first-run guide."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pytest
from textual.widgets import Static

from store import record
from store.base.session import from_environ
from store.db.book import open_book
from store.exchange.demo import discard, is_throwaway
from store.ledger import journal, register
from store.ledger.entries import Note
from store.ledger.register import Technician
from tests.kit.plant import settle
from tui import cli
from tui.app import SumpbookApp, open_for_app
from tui.screens.first_run import FirstRunScreen
from tui.screens.register import RegisterScreen
from tui.screens.sign_in import SignInScreen
from tui.screens.watch import WatchScreen


@pytest.fixture
def no_logbook(tmp_path, monkeypatch):
    """No SUMPBOOK_DB and an empty user data folder: the first start on a new laptop."""
    monkeypatch.delenv("SUMPBOOK_DB", raising=False)
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    return tmp_path / "data"


def notes(path: Path) -> list[str]:
    with open_book(path, create=False) as book:
        return [e.note for e in journal.read(book, kinds=["note"])]


def test_no_logbook_opens_a_fresh_demo_each_time_and_keeps_nothing(no_logbook):
    from store.exchange.demo import discard

    book, demo, new_path = open_for_app(None, from_environ(os.environ))
    first = book.path
    assert demo and new_path is None and is_throwaway(first)
    assert Path(tempfile.gettempdir()).resolve() in first.resolve().parents
    record.log(book, Note(unit=None, note="logged on the demo", by="AK"))
    book.close()
    discard(first)
    assert not first.exists()
    book, demo, _ = open_for_app(
        None, from_environ(os.environ)
    )  # the next start: the story as frozen, no note
    try:
        assert demo and book.path != first
        assert "logged on the demo" not in notes(book.path)
    finally:
        book.close()
        discard(book.path)
    assert not no_logbook.exists() or not any(no_logbook.rglob("*.db"))  # nothing kept


async def test_the_demo_says_it_keeps_nothing(no_logbook):
    book, demo, _ = open_for_app(None, from_environ(os.environ))
    app = SumpbookApp(book, demo=demo, cursor_blink=False, session=from_environ(os.environ))
    try:
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            if isinstance(app.screen, SignInScreen):
                await pilot.press("escape")
            await settle(pilot, WatchScreen)
            banner = str(app.screen.query_one("DemoBanner", Static).render())
            assert "DEMO" in banner and "not kept" in banner and "--db" in banner
            assert len(banner) <= 78  # one line at 80 columns
            assert any("not kept" in n.message for n in app._notifications)
    finally:
        app.book.close()
        discard(app.book.path)  # as run_app does when the app closes


async def test_a_new_db_path_offers_to_create_the_logbook_there(tmp_path):
    new = tmp_path / "site" / "new.db"
    new.parent.mkdir()
    book, demo, new_path = open_for_app(new, from_environ(os.environ))
    scratch = book.path
    assert not demo and new_path == new and not new.exists()
    app = SumpbookApp(
        book, demo=demo, cursor_blink=False, new_path=new_path, session=from_environ(os.environ)
    )
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        guide = app.screen
        assert isinstance(guide, FirstRunScreen)
        shown = str(guide.query_one("#first-guide", Static).render())
        assert str(new) in "".join(shown.split())  # a long path wraps at 80 columns
        assert not app.demo and not new.exists()  # only offered
        await pilot.press("escape")  # nothing to stay in: the guide waits
        assert app.screen is guide
        await pilot.press("g")
        await pilot.pause()
        assert new.exists() and app.book.path == new and not app.demo
        assert not scratch.exists()  # the empty stand-in is gone
        assert isinstance(app.screen, SignInScreen)  # nobody registered: add yourself
        await pilot.press(*"JK", "space", *"Jan", "enter")
        await settle(pilot, RegisterScreen)
    app.book.close()
    with open_book(new, create=False) as made:
        assert register.get(made, Technician, "JK").name == "Jan"


async def test_a_new_db_path_left_with_q_creates_nothing(tmp_path):
    new = tmp_path / "new.db"
    book, demo, new_path = open_for_app(new, from_environ(os.environ))
    app = SumpbookApp(
        book, demo=demo, cursor_blink=False, new_path=new_path, session=from_environ(os.environ)
    )
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, FirstRunScreen)
        await pilot.press("q")
        await pilot.pause()
    assert not app.is_running and not new.exists()
    app.book.close()
    discard(app.book.path)  # the empty stand-in, as run_app does


def test_cli_db_with_a_new_path_starts_the_guide_not_the_demo(tmp_path, monkeypatch):
    seen = {}

    def run(self):  # the app as the command line starts it, without a terminal
        seen.update(demo=self.demo, new_path=self.new_path, path=self.book.path)

    monkeypatch.setattr(SumpbookApp, "run", run)
    monkeypatch.setattr(cli, "_has_terminal", lambda: True)  # as on a terminal
    new = tmp_path / "NEW.db"
    assert cli.main(["--db", str(new)]) == 0
    assert seen["new_path"] == new and not seen["demo"] and seen["path"] != new
    assert not new.exists() and not seen["path"].exists()  # the stand-in was discarded
