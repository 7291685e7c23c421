"""A book holding a value stored outside sumpbook that breaks its table's CHECK (a hand-made
edit) opens with that entry skipped and noted; an upgrade to this schema carries the entry
as it is (its copies and its proof let through the bad values the book held) instead of
refusing the book. An upgrade that gave a bad value the book did not hold is still refused,
and a damaged file still is. Backups and restores stay strict: a bit flipped in a copy can
read as a bad value (tests/store/test_proven_files.py). Common practice, no source."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import pytest

from store.base.errors import BookError, NotALogbook
from store.db import schema
from store.db.backup import copy_to
from store.db.book import open_book
from store.db.proof import prove_file
from store.ledger import journal


def with_bad_value(path: Path, entry_id: str) -> None:
    """An entry whose ΔP is a text, written past the table's CHECK (as a hand edit would)."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")
    cols = [r[1] for r in conn.execute("PRAGMA table_info(entries)")]
    row = dict(
        zip(
            cols,
            conn.execute("SELECT * FROM entries WHERE kind = 'reading' LIMIT 1").fetchone(),
            strict=True,
        )
    )
    row.update(id=entry_id, dp_bar="not a number")
    marks = ", ".join("?" for _ in row)
    conn.execute(f"INSERT INTO entries ({', '.join(row)}) VALUES ({marks})", list(row.values()))
    conn.close()


def schema_7(path: Path) -> None:
    """The book as the previous schema left it (the step this version adds undone)."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript("DROP TABLE status_earlier; PRAGMA user_version = 7;")
    conn.close()


@pytest.fixture
def bad(demo_file: Path, tmp_path: Path) -> Path:
    path = tmp_path / "book.db"
    shutil.copy(demo_file, path)
    with_bad_value(path, "bad-00000001")
    return path


def skipped(path: Path) -> list[str]:
    with open_book(path, create=False) as book:
        assert book.conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION
        ids = {e.id for e in journal.read(book)}
        held = book.conn.execute("SELECT id FROM entries WHERE id LIKE 'bad-%'").fetchall()
    return sorted(i for (i,) in held if i not in ids)


def test_a_book_holding_a_bad_value_upgrades_carrying_it(bad):
    schema_7(bad)
    assert skipped(bad) == ["bad-00000001"]  # opened: upgraded, the entry left out as before


def test_an_upgrade_that_gave_a_new_bad_value_is_refused(bad, tmp_path):
    upgraded = tmp_path / "upgraded.db"
    shutil.copy(bad, upgraded)
    label = "the upgraded copy"
    assert prove_file(upgraded, label, held=bad) == schema.SCHEMA_VERSION  # the same one
    with_bad_value(upgraded, "bad-00000002")  # one the book before did not hold
    with pytest.raises(NotALogbook, match="CHECK constraint failed in entries"):
        prove_file(upgraded, label, held=bad)
    with pytest.raises(NotALogbook):
        prove_file(upgraded, label)  # without the book before: no row finding goes


def test_a_damaged_book_is_not_upgraded(bad, tmp_path):
    # A page of the entries table overwritten: damage, not a bad value.
    schema_7(bad)
    before = bad.read_bytes()
    conn = sqlite3.connect(bad)
    page = conn.execute("PRAGMA page_size").fetchone()[0]
    root = conn.execute("SELECT rootpage FROM sqlite_master WHERE name = 'entries'").fetchone()[0]
    conn.close()
    with bad.open("r+b") as f:
        f.seek((root - 1) * page + 8)
        f.write(b"\xff" * 64)
    damaged = bad.read_bytes()
    assert damaged != before
    with pytest.raises(BookError):
        open_book(bad, create=False).close()
    assert bad.read_bytes() == damaged  # left as it was


def test_a_backup_of_a_book_holding_a_bad_value_stays_strict(bad, tmp_path):
    # A copy's check cannot tell a hand edit from a flipped bit: a backup refuses both.
    with open_book(bad, create=False) as book:
        with pytest.raises(BookError, match="did not check out"):
            copy_to(book.conn, tmp_path / "backup.db")
