"""A damaged or foreign file is refused, with a clear one-line message and a pointer to the
latest backup, and nothing is written to it: on open when the header or schema is hit, at the
first write of a process (the whole-file check) when the damage is deeper, and with a one-line
message when a command only reads and meets a damaged page."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from store import record
from store.base.errors import NotALogbook
from store.db import schema
from store.db.backup import latest_backup, restore, rolling_backup
from store.db.book import open_book
from store.db.connection import forget_check
from store.ledger.entries import Note
from tests.kit.damage import noise, overwrite, root_page
from tests.kit.plant import fill_register


def _logbook(path: Path, notes: int = 300) -> None:
    with open_book(path) as book:
        book.conn.execute("PRAGMA synchronous = OFF")  # test speed only
        fill_register(book)
        record.log_many(
            book, [Note(unit="P1", note=f"round {i} " + "x" * 200, by="AB") for i in range(notes)]
        )
        rolling_backup(book.conn, book.path, "on-close")
    forget_check(path)  # the tests damage it "later": as a new process would meet it


def _write_note(path: Path) -> None:
    with open_book(path) as book:
        record.log(book, Note(unit="P1", note="one more", by="AB"))


def _damage(kind: str, path: Path) -> None:
    size = path.stat().st_size
    if kind == "random bytes":
        path.write_bytes(noise(size))
    elif kind == "text":
        path.write_text("time,kind,by\n2026-01-05T07:00,note,AB\n" * 50)
    elif kind == "header smashed":
        overwrite(path, 0, noise(100))
    elif kind == "entries page smashed":
        offset, size = root_page(path, "entries")
        overwrite(path, offset, noise(size))
    elif kind == "cut short":
        with path.open("r+b") as f:
            f.truncate(size // 2)
    elif kind == "foreign application id":
        overwrite(path, 68, (0x12345678).to_bytes(4, "big"))
    elif kind == "foreign sqlite file":
        path.unlink()
        conn = sqlite3.connect(path)
        conn.execute("CREATE TABLE entries (id TEXT, note TEXT)")
        conn.execute("INSERT INTO entries VALUES ('1', 'not ours')")
        conn.commit()
        conn.close()
    else:
        raise AssertionError(kind)


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


KINDS = [
    "random bytes",
    "text",
    "header smashed",
    "entries page smashed",
    "cut short",
    "foreign application id",
    "foreign sqlite file",
]


@pytest.mark.parametrize("kind", KINDS)
def test_damaged_or_foreign_files_are_refused_untouched(tmp_path, kind):
    path = tmp_path / "logbook.db"
    _logbook(path)
    backup = latest_backup(path)
    assert backup is not None
    _damage(kind, path)
    before = path.read_bytes()
    with pytest.raises(NotALogbook) as refused:
        _write_note(path)
    message = str(refused.value)
    assert "\n" not in message
    assert "damaged" in message or "not a sumpbook logbook" in message
    assert str(backup) in message and "sumpbook restore" in message
    assert path.read_bytes() == before  # nothing written to it
    assert not Path(f"{path}-journal").exists()
    # The pointer is good advice: the backup restores, and the damaged file is kept as it was.
    kept = restore(backup, path)
    assert kept is not None and kept.read_bytes() == before
    with open_book(path) as book:
        assert book.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == 300
        assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_without_a_backup_the_message_says_so(tmp_path):
    path = tmp_path / "logbook.db"
    path.write_bytes(noise(8192))
    with pytest.raises(NotALogbook, match="no automatic backup was found"):
        open_book(path)


def test_the_first_write_checks_the_whole_file(tmp_path):
    # The header is intact (right application id and version): only the whole-file check
    # finds the damage. Opening to read does not run it; the first write does, and refuses.
    path = tmp_path / "logbook.db"
    _logbook(path, notes=600)
    offset, _ = root_page(path, "entries")
    overwrite(path, offset + 12, noise(40))  # the root page's cell pointers
    before = path.read_bytes()
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    assert conn.execute("PRAGMA application_id").fetchone()[0] == schema.APPLICATION_ID
    assert conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION
    conn.close()
    with open_book(path, create=False) as book:
        # reads what is not damaged
        assert book.conn.execute("SELECT count(*) FROM technicians").fetchone()[0] > 0
        with pytest.raises(NotALogbook, match="damaged.*nothing was written"):
            record.log(book, Note(unit="P1", note="one more", by="AB"))
    assert path.read_bytes() == before


def test_a_read_that_meets_damage_says_so_in_one_line(tmp_path, capsys):
    from tui.cli import main

    path = tmp_path / "logbook.db"
    _logbook(path, notes=600)
    offset, _ = root_page(path, "entries")
    overwrite(path, offset + 12, noise(40))
    before = path.read_bytes()
    out = tmp_path / "all.csv"
    code = main(["--db", str(path), "export", "--from", "2000-01-01T00:00", "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "damaged" in err and "sumpbook restore" in err
    assert "Traceback" not in err
    assert path.read_bytes() == before
    assert not out.exists() and not list(tmp_path.glob("*.part"))  # no half-written export


def test_an_empty_file_becomes_a_new_logbook(tmp_path):
    # Not damage: a zero-length file is where a new logbook is started (SQLite's own rule).
    path = tmp_path / "logbook.db"
    path.touch()
    with open_book(path) as book:
        assert book.conn.execute("PRAGMA application_id").fetchone()[0] == schema.APPLICATION_ID
