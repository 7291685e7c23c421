"""An upgrade replaces the book as a restore does (issue 20, item 1): the book is copied to a
side file, the copy migrated and proven, the book kept, then swapped. Any failure leaves the
live file byte for byte as it was and no side file behind."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError, NotALogbook
from store.db import book as book_module
from store.db import schema
from store.db.book import open_book
from store.db.places import backup_dir
from store.ledger.entries import Note


def _next_version(monkeypatch, step: str) -> int:
    steps = [*schema.MIGRATIONS, step]
    monkeypatch.setattr("store.db.book.MIGRATIONS", steps)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(steps))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(steps))
    return len(steps)


def _companions(path: Path) -> list[str]:
    return sorted(p.name for p in path.parent.iterdir() if p.name.startswith(path.name))


def _notes(path: Path) -> list[str]:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return sorted(r[0] for r in conn.execute("SELECT note FROM entries"))
    finally:
        conn.close()


def test_an_upgrade_whose_result_fails_the_proof_leaves_the_book_as_it_was(book, monkeypatch):
    # a text that is not UTF-8: the migration's own quick check passes it, the proof does not
    record.log(book, Note(unit="P1", note="before", by="AB"))
    path = book.path
    book.close()
    before = path.read_bytes()
    _next_version(monkeypatch, "UPDATE technicians SET name = CAST(X'FF41' AS TEXT);")
    with pytest.raises(NotALogbook, match="not UTF-8.*was left as it was"):
        open_book(path)
    assert path.read_bytes() == before
    assert _companions(path) == ["book.db"]
    assert not backup_dir(path).exists() or not list(backup_dir(path).glob("*upgrade*"))


def test_a_save_made_while_the_upgrade_ran_is_in_the_upgraded_book(book, monkeypatch):
    """Another program saves after the upgrade copied the book: the swap sees the book is
    not what it copied, swaps nothing, and the upgrade starts again from the book as saved."""
    record.log(book, Note(unit="P1", note="before", by="AB"))
    path = book.path
    book.close()
    version = _next_version(monkeypatch, "ALTER TABLE units ADD COLUMN colour TEXT;")
    original = book_module.migrate
    calls: list[int] = []

    def migrate_while_another_saves(conn, from_version):
        calls.append(from_version)
        if len(calls) == 1:  # the first run: another program saves to the live book now
            other = sqlite3.connect(path, isolation_level=None)
            other.execute(
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, note) VALUES "
                "('00000000-0000-4000-8000-0000000000aa', '2026-05-01T08:00:00Z', "
                "'2026-05-01T08:00:00Z', 'note', 'AB', 'P1', 'saved meanwhile')"
            )
            other.close()
        return original(conn, from_version)

    monkeypatch.setattr(book_module, "migrate", migrate_while_another_saves)
    with open_book(path) as upgraded:
        assert upgraded.conn.execute("PRAGMA user_version").fetchone()[0] == version
    assert len(calls) == 2
    assert _notes(path) == ["before", "saved meanwhile"]
    kept = list(backup_dir(path).glob("book-before-v*-upgrade-*.db"))
    assert len(kept) == 1 and _notes(kept[0]) == ["before", "saved meanwhile"]


def test_an_upgrade_meeting_a_lock_held_too_long_says_busy_and_changes_nothing(book, monkeypatch):
    """The swap holds the book's write lock as a restore does: a save holding the lock past
    the busy timeout makes the upgrade say the book is busy and leave it as it was."""
    path = book.path
    book.close()
    _next_version(monkeypatch, "ALTER TABLE units ADD COLUMN colour TEXT;")
    monkeypatch.setattr("store.db.backup.BUSY_TIMEOUT_MS", 200)
    holder = sqlite3.connect(path, isolation_level=None)
    original = book_module.migrate

    def migrate_then_lock(conn, from_version):
        result = original(conn, from_version)
        holder.execute("BEGIN IMMEDIATE")  # another program's save, under way
        return result

    monkeypatch.setattr(book_module, "migrate", migrate_then_lock)
    before = path.read_bytes()
    with pytest.raises(BookError, match="busy.*left as it was"):
        open_book(path)
    holder.execute("ROLLBACK")
    holder.close()
    assert path.read_bytes() == before
