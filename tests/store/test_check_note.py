"""The check note: a process whose first write finds the book exactly as a checked process
left it skips the whole-file quick check; any other look of the file, and it checks again.

"A new process" is simulated by forgetting what this one checked and vouched for, leaving
the note on disk (`_new_process`); the checks are counted by wrapping the real one."""

from __future__ import annotations

import os
import shutil
import sqlite3
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from store import record
from store.base.errors import NotALogbook
from store.db import book as book_module
from store.db import checknote
from store.db.book import open_book
from store.db.connection import CHECKED, check_key, forget_check
from store.db.places import check_note, damage_marker
from store.ledger.entries import Note
from tests.kit.damage import noise, overwrite, root_page
from tests.kit.plant import fill_register
from tests.kit.plant import run_cli as run


def _new_process(path: Path) -> None:
    CHECKED.discard(check_key(path))
    checknote.forget(check_key(path))


@pytest.fixture
def checks(monkeypatch) -> list[Path]:
    """Every whole-file quick check run, by file."""
    runs: list[Path] = []
    real = book_module._quick_check_now

    def counted(conn, path):
        runs.append(Path(path))
        real(conn, path)

    monkeypatch.setattr(book_module, "_quick_check_now", counted)
    return runs


@pytest.fixture
def book_path(tmp_path) -> Path:
    path = tmp_path / "plant.db"
    with open_book(path) as book:
        fill_register(book)
        record.log_many(book, [Note(unit="P1", note=f"round {i} " + "x" * 200, by="AB")
                               for i in range(300)])  # fmt: skip
    forget_check(path)  # made by "another process", never checked: no note yet
    return path


def _save(path: Path, text: str = "one more") -> None:
    with open_book(path, create=False) as book:
        record.log(book, Note(unit="P1", note=text, by="AB"))


def test_the_next_process_takes_the_note_of_a_checked_save(book_path, checks):
    _save(book_path)  # checks, saves, notes
    assert checks == [book_path] and check_note(book_path).exists()
    for i in range(3):
        _new_process(book_path)
        _save(book_path, f"save {i}")  # each finds the file as the one before left it
    assert checks == [book_path]


def test_bytes_changed_by_another_program_are_checked_and_refused(book_path, checks):
    _save(book_path)
    _new_process(book_path)
    offset, size = root_page(book_path, "entries")
    overwrite(book_path, offset, noise(size))  # not through SQLite: damage
    with pytest.raises(NotALogbook, match="damaged"):
        _save(book_path)
    assert len(checks) == 2
    assert damage_marker(book_path).exists() and not check_note(book_path).exists()


def test_damage_with_its_modification_time_put_back_is_checked(book_path, checks):
    _save(book_path)
    _new_process(book_path)
    before = book_path.stat()
    offset, size = root_page(book_path, "entries")
    overwrite(book_path, offset, noise(size))
    os.utime(book_path, ns=(before.st_atime_ns, before.st_mtime_ns))  # as `cp -p` would
    with pytest.raises(NotALogbook):
        _save(book_path)
    assert len(checks) == 2


def test_an_edit_through_sqlite_by_another_program_is_checked_again(book_path, checks):
    _save(book_path)
    _new_process(book_path)
    conn = sqlite3.connect(book_path)  # the sqlite3 shell, say
    with conn:
        conn.execute("INSERT OR REPLACE INTO settings(key, value) VALUES ('name', 'By hand')")
    conn.close()
    _save(book_path)
    assert checks == [book_path, book_path]  # sound, but not vouched for: checked again


def test_a_change_between_two_saves_of_one_process_stops_the_chain(book_path, checks):
    with open_book(book_path, create=False) as book:
        record.log(book, Note(unit="P1", note="first", by="AB"))
        conn = sqlite3.connect(book_path)  # another program writes while the book is open
        with conn:
            conn.execute("INSERT OR REPLACE INTO settings(key, value) VALUES ('name', 'By hand')")
        conn.close()
        record.log(book, Note(unit="P1", note="second", by="AB"))
    # this process checked once (as before the note), and vouches for nothing it did not see
    _new_process(book_path)
    _save(book_path)
    assert checks == [book_path, book_path]


def test_a_note_older_than_a_day_is_not_taken(book_path, checks):
    _save(book_path)
    _new_process(book_path)
    seen, _ = check_note(book_path).read_text(encoding="utf-8").split("\n")[:2]
    then = datetime.now(UTC) - checknote.NOTE_GOOD_FOR - timedelta(minutes=1)
    check_note(book_path).write_text(f"{seen}\n{then.isoformat()}\n", encoding="utf-8")
    _save(book_path)
    assert len(checks) == 2  # common practice, no source: a check at least once a day


def test_the_note_keeps_the_time_of_its_check_across_saves(book_path, checks):
    _save(book_path)
    first = check_note(book_path).read_text(encoding="utf-8").split("\n")[1]
    _new_process(book_path)
    _save(book_path)
    assert check_note(book_path).read_text(encoding="utf-8").split("\n")[1] == first
    assert not checknote.holds(book_path, "x", datetime.now(UTC) + timedelta(hours=25))


@pytest.mark.parametrize("text", ["", "garbage", "a\nb\nc\n", "\x00\x01", "x\nnot a time\n"])
def test_a_note_that_cannot_be_read_means_a_check(book_path, checks, text):
    _save(book_path)
    _new_process(book_path)
    check_note(book_path).write_text(text, encoding="utf-8")
    _save(book_path)
    assert len(checks) == 2


def test_a_copy_with_its_note_beside_it_is_checked(book_path, checks, tmp_path):
    _save(book_path)
    copy = tmp_path / "copy.db"
    shutil.copy2(book_path, copy)
    shutil.copy2(check_note(book_path), check_note(copy))
    _save(copy)  # another file (inode), whatever the note beside it says
    assert checks == [book_path, copy]


def test_a_restore_drops_the_note(book_path, checks):
    _save(book_path)
    forget_check(book_path)  # what a restore calls once another file stands there
    assert not check_note(book_path).exists()


def test_the_command_line_takes_the_note_and_still_refuses_damage(book_path, checks, capsys):
    log = ("--db", str(book_path), "log", "note", "--unit", "P1", "--by", "AB")
    assert run(capsys, *log, "first")[0] == 0
    _new_process(book_path)
    assert run(capsys, *log, "second")[0] == 0
    assert len(checks) == 1
    _new_process(book_path)
    offset, size = root_page(book_path, "entries")
    overwrite(book_path, offset, noise(size))
    damaged = book_path.read_bytes()
    code, out, err = run(capsys, *log, "third")
    assert code == 2 and "damaged" in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1  # SQLite's many lines for one page, as one
    assert book_path.read_bytes() == damaged  # nothing written


def test_a_finding_of_many_lines_is_said_in_one():
    from store.db.connection import one_line

    # as SQLite 3.40's quick check gave it for one page overwritten with noise (seen here)
    finding = (
        "*** in database main ***\nOn tree page 20001 cell 25: Rowid 7246 out of order\n"
        "On tree page 20001 cell 25: invalid page number 1700207531\n"
        "On tree page 20001 cell 22: Rowid 88 out of order"
    )
    assert one_line(finding) == "On tree page 20001 cell 25: Rowid 7246 out of order (and 2 more)"
    assert one_line("row 3 missing from index x") == "row 3 missing from index x"


def test_a_file_that_cannot_be_looked_at_matches_no_note(tmp_path):
    # stat fails with an error other than "no such file" (here: a file used as a folder)
    odd = tmp_path / "plain-file"
    odd.write_text("x", encoding="utf-8")
    path = odd / "plant.db"
    assert checknote.look(path) == "? ?"
    assert not checknote.unchanged(path, "odd")  # a save goes on, vouching for nothing
    assert not checknote.holds(path, "odd")


def test_the_apps_check_behind_its_list_takes_the_note_too(book_path, checks):
    from store.db.book import deep_check

    deep_check(book_path)  # the app's first start: checks, notes
    assert checks == [book_path] and check_note(book_path).exists()
    _new_process(book_path)
    deep_check(book_path)  # the next start: the file as it was left
    _save(book_path)  # and its first save does not wait for a check either
    assert checks == [book_path]
    _new_process(book_path)
    conn = sqlite3.connect(book_path)
    with conn:
        conn.execute("INSERT OR REPLACE INTO settings(key, value) VALUES ('name', 'By hand')")
    conn.close()
    deep_check(book_path)
    assert checks == [book_path, book_path]


def test_a_passed_full_check_notes_the_file_too(book_path, checks, capsys):
    assert run(capsys, "--db", str(book_path), "check")[0] == 0
    assert check_note(book_path).exists()
    _new_process(book_path)
    _save(book_path)
    assert checks == []  # the full check vouched for it: no quick check after it
