"""Damage found by the full check stops writes, and refused files get no side files.

The damage here is the kind SQLite's quick check does not look for (PRAGMA quick_check
"does not verify that index content matches table content", sqlite.org/pragma.html): one
changed byte in an index entry, the table row left as it was. The full integrity check finds
it; `sumpbook check` runs that check, and from then on every write of every process refuses
the book until it is restored.
"""

from __future__ import annotations

import shutil
import sqlite3
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from store import record
from store.base.errors import NotALogbook
from store.db.backup import latest_backup, rolling_backup
from store.db.book import open_book
from store.db.connection import forget_check
from store.db.places import damage_marker
from store.ledger.entries import Note
from tests.kit.plant import fill_register
from tests.kit.plant import run_cli as run
from tui.cli import main


def _logbook(path: Path) -> None:
    with open_book(path) as book:
        fill_register(book)
        start = datetime(2026, 3, 1, 6, tzinfo=UTC)
        record.log_many(
            book,
            [
                Note(unit="P1", note=f"round {i}", by="AB", at=start + timedelta(minutes=7 * i))
                for i in range(200)
            ],
        )
        rolling_backup(book.conn, book.path, "on-close")
    forget_check(path)  # damaged "later", as a new process meets it


def _check(path: Path, pragma: str) -> str:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return "; ".join(str(r[0]) for r in conn.execute(f"PRAGMA {pragma}").fetchall())
    finally:
        conn.close()


def damage_an_index_entry(path: Path) -> None:
    """Change one digit of a stored time where it sits in an index (not in the table row),
    so that the quick check passes and the integrity check does not."""
    data = path.read_bytes()
    stamp = b"2026-03-01T12:04:00Z"  # the 53rd note's time (06:00 + 52 x 7 min)
    start = 0
    while (at := data.find(stamp, start)) >= 0:
        start = at + 1
        trial = path.with_name("trial.db")
        changed = bytearray(data)
        changed[at + len(stamp) - 2] = ord("1")  # :00Z -> :01Z, the order stays
        trial.write_bytes(bytes(changed))
        if _check(trial, "quick_check") == "ok" and _check(trial, "integrity_check") != "ok":
            trial.unlink()
            path.write_bytes(bytes(changed))
            return
        trial.unlink()
    raise AssertionError("no index entry of the stamp found")


@pytest.fixture
def damaged(tmp_path) -> Path:
    path = tmp_path / "book.db"
    _logbook(path)
    damage_an_index_entry(path)
    return path


def test_the_damage_is_one_the_quick_check_misses(damaged):
    assert _check(damaged, "quick_check") == "ok"
    assert "entries_by" in _check(damaged, "integrity_check")


def test_check_finds_it_and_every_later_write_refuses_until_restored(damaged, capsys):
    # before any check, the first write's quick check lets it through (the gap this closes)
    code, _, err = run(capsys, "--db", str(damaged), "check")
    assert code == 2
    assert len(err.strip().splitlines()) == 1
    backup = latest_backup(damaged)
    assert "damaged" in err and f"sumpbook restore '{backup}'" in err
    assert damage_marker(damaged).exists()
    before = damaged.read_bytes()
    for args in (
        ["log", "note", "pump loud", "--unit", "P1", "--by", "AB"],
        ["register", "tech", "EF"],
        ["plant", "name=Hall"],
    ):
        code, _, err = run(capsys, "--db", str(damaged), *args)
        assert code == 2 and "damaged" in err and "nothing was saved" in err, args
        assert len(err.strip().splitlines()) == 1
    assert damaged.read_bytes() == before
    # reading still works
    assert run(capsys, "--db", str(damaged), "list", "entries", "--limit", "3")[0] == 0
    # a restore clears it
    code, _, err = run(capsys, "--db", str(damaged), "restore", str(backup))
    assert code == 0, err
    assert not damage_marker(damaged).exists()
    code, out, _ = run(capsys, "--db", str(damaged), "check")
    assert code == 0 and out.startswith("ok")
    code, _, err = run(capsys, "--db", str(damaged), "log", "note", "pump loud", "--by", "AB")
    assert code == 0, err


def test_check_of_a_sound_book_says_ok_and_clears_an_old_record(tmp_path, capsys):
    path = tmp_path / "book.db"
    _logbook(path)
    device, inode = path.stat().st_dev, path.stat().st_ino
    damage_marker(path).write_text(f"{device}:{inode} quick check: stale record\n")
    code, out, _ = run(capsys, "--db", str(path), "check")
    assert code == 0 and out.strip() == f"ok: {path} passed the full integrity check"
    assert not damage_marker(path).exists()


def test_a_record_of_another_file_is_not_held_against_a_new_book(damaged, capsys):
    assert run(capsys, "--db", str(damaged), "check")[0] == 2
    damaged.unlink()  # a new book in its place (a demo, a fresh start)
    assert run(capsys, "--db", str(damaged), "register", "tech", "EF")[0] == 0
    code, _, err = run(capsys, "--db", str(damaged), "log", "note", "first", "--by", "EF")
    assert code == 0, err


def test_a_process_that_opened_the_book_before_the_check_refuses_too(damaged, capsys):
    with open_book(damaged) as book:  # open already, e.g. the app
        assert run(capsys, "--db", str(damaged), "check")[0] == 2
        with pytest.raises(NotALogbook, match="damaged"):
            record.log(book, Note(unit="P1", note="after the check", by="AB"))


async def _note_refused(app, pilot) -> str:
    """Save a note through the form; returns the form's message (the form must stay)."""
    from textual.widgets import Input, Static

    from tui.forms.note import NoteForm

    app.open_form("note", "P1")
    await pilot.pause()
    form = app.screen
    assert isinstance(form, NoteForm)
    form.query_one("#f-note", Input).value = "filter housing weeps"
    await pilot.press("ctrl+s")
    await pilot.pause()
    assert isinstance(app.screen, NoteForm)  # the form stays, with what was typed
    assert form.query_one("#f-note", Input).value == "filter housing weeps"
    return str(form.query_one("#form-msg", Static).render())


async def test_a_check_run_while_the_app_is_open_stops_its_saves(damaged, monkeypatch, tmp_path):
    from tests.kit.plant import app_for, settle, write_prefs
    from tui.screens.watch import WatchScreen

    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path)))
    count = _check_count(damaged)
    app = app_for(damaged)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert app.book_checked  # the app's own (quick) check passed: this damage is deeper
        assert main(["--db", str(damaged), "check"]) == 2  # in a terminal beside the app
        assert "damaged" in await _note_refused(app, pilot)
    app.book.close()
    assert _check_count(damaged) == count


async def test_the_apps_background_check_records_what_it_finds(tmp_path, monkeypatch, capsys):
    from tests.kit.damage import noise, overwrite, root_page
    from tests.kit.plant import app_for, settle, write_prefs
    from tui.screens.watch import WatchScreen

    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path)))
    path = tmp_path / "book.db"
    _logbook(path)
    offset, _ = root_page(path, "entries")
    overwrite(path, offset + 12, noise(40))
    app = app_for(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert app.book_checked
        messages = [n.message for n in app._notifications]
        assert any("damaged" in m and "sumpbook restore" in m for m in messages)
        assert "damaged" in await _note_refused(app, pilot)
    app.book.close()
    assert damage_marker(path).exists()  # another process refuses without checking again


def _check_count(path: Path) -> int:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    finally:
        conn.close()


# ---- side files ----------------------------------------------------------------------------------


def _other_sqlite_file(path: Path, wal: bool) -> None:
    conn = sqlite3.connect(path)
    if wal:
        conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("CREATE TABLE parts (number TEXT)")
    conn.commit()
    conn.close()


@pytest.mark.parametrize("wal", [True, False])
def test_a_file_that_is_not_a_logbook_gets_no_side_files(tmp_path, capsys, wal):
    path = tmp_path / "parts.db"
    _other_sqlite_file(path, wal)
    before = sorted(p.name for p in tmp_path.iterdir())
    for args in (["list", "units"], ["log", "note", "x", "--by", "AB"], ["check"]):
        code, _, err = run(capsys, "--db", str(path), *args)
        assert code == 2 and "not a sumpbook logbook" in err
        assert sorted(p.name for p in tmp_path.iterdir()) == before, args


def test_a_damaged_logbook_refused_at_the_first_write_gets_no_side_files(tmp_path, capsys):
    from tests.kit.damage import noise, overwrite, root_page

    path = tmp_path / "book.db"
    _logbook(path)
    offset, _ = root_page(path, "entries")
    overwrite(path, offset + 12, noise(40))
    shutil.rmtree(tmp_path / "book-backups")
    before = sorted(p.name for p in tmp_path.iterdir())
    for args in (["log", "note", "x", "--unit", "P1", "--by", "AB"], ["check"]):
        code, _, err = run(capsys, "--db", str(path), *args)
        assert code == 2 and "damaged" in err, err
        names = sorted(p.name for p in tmp_path.iterdir() if p.name != "book.db.damaged")
        assert names == before, args
