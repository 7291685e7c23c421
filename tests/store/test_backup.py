"""Backups: rolling copies (on close, before each migration) through SQLite's online backup
API, keeping the last N; `sumpbook backup DEST` and `sumpbook restore FILE`."""

from __future__ import annotations

import os
import signal
import sqlite3
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError, NotALogbook, TooNew
from store.db import schema
from store.db.backup import (
    DEFAULT_KEEP,
    KEEP_SETTING,
    backup_dir,
    copy_to,
    keep_count,
    latest_backup,
    restore,
    rolling_backup,
    rolling_backups,
)
from store.db.book import open_book
from store.ledger import journal
from store.ledger.entries import Note
from tests.kit.crash_writer import parse_report, read_all, run_child, wait_for_commits, warm_up
from tui.cli import main


def _count(path: Path) -> int:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert conn.execute("PRAGMA application_id").fetchone()[0] == schema.APPLICATION_ID
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    finally:
        conn.close()


def _note(book, text: str = "checked") -> None:
    record.log(book, Note(unit="P1", note=text, by="AB"))


def test_rolling_backups_keep_the_newest_n(book):
    book.set_setting(KEEP_SETTING, "3")
    made = []
    for i in range(5):
        _note(book, f"round {i}")
        made.append(rolling_backup(book.conn, book.path, "on-close"))
    kept = rolling_backups(book.path)
    assert kept == made[-3:]
    assert [_count(p) for p in kept] == [3, 4, 5]  # each a whole, consistent copy
    assert latest_backup(book.path) == made[-1]


def test_keep_count_default_and_bad_settings(book):
    assert keep_count(book.conn) == DEFAULT_KEEP
    with pytest.raises(BookError, match="whole number"):  # the setting refuses them now
        book.set_setting(KEEP_SETTING, "many")

    def plant(value: str) -> None:  # as a hand-made edit of the file would
        book.conn.execute(
            "INSERT INTO settings(key, value) VALUES (?, ?) "
            "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
            [KEEP_SETTING, value],
        )

    plant("many")
    assert keep_count(book.conn) == DEFAULT_KEEP
    plant("0")
    assert keep_count(book.conn) == 1  # never keep none
    assert rolling_backup(book.conn, book.path, "on-close", keep=2).exists()


def test_closing_without_changes_does_not_push_out_older_copies(book):
    _note(book)
    first = rolling_backup(book.conn, book.path, "on-close", keep=2)
    for _ in range(4):  # the app opened and closed, nothing logged
        assert rolling_backup(book.conn, book.path, "on-close", keep=2) == first
    assert rolling_backups(book.path) == [first]
    _note(book)
    second = rolling_backup(book.conn, book.path, "on-close", keep=2)
    assert rolling_backups(book.path) == [first, second]


def test_backups_are_consistent_while_another_process_writes(tmp_path, book):
    warm_up(tmp_path)
    book.close()  # no connection of ours may cross the fork
    pid, fd = run_child(book.path, seed=7)
    report = b""
    try:
        with open_book(book.path) as reader:
            copies = []
            while len(copies) < 6:
                report += wait_for_commits(fd, 2)  # the writer goes on between copies
                copies.append(rolling_backup(reader.conn, reader.path, f"during{len(copies)}", 20))
    finally:
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
    committed, _, errors = parse_report(report.decode() + read_all(fd))
    assert not errors and len(committed) >= 12
    counts = [_count(p) for p in copies]  # each passes the integrity check
    assert counts == sorted(set(counts))  # every copy holds more than the one before


def test_a_backup_is_made_before_each_migration(tmp_path, book, monkeypatch):
    _note(book, "before the upgrade")
    path = book.path
    book.close()
    steps = schema.MIGRATIONS + ["ALTER TABLE units ADD COLUMN colour TEXT;"]
    monkeypatch.setattr("store.db.book.MIGRATIONS", steps)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(steps))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(steps))
    with open_book(path) as upgraded:
        assert upgraded.conn.execute("PRAGMA user_version").fetchone()[0] == len(steps)
    # kept as a restore keeps the book it replaces (never dropped by the rolling copies)
    copy = next(backup_dir(path).glob(f"book-before-v{schema.SCHEMA_VERSION}-upgrade-*.db"))
    conn = sqlite3.connect(copy)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION
    assert conn.execute("SELECT note FROM entries").fetchone()[0] == "before the upgrade"
    conn.close()


def test_a_failed_migration_leaves_the_book_byte_for_byte_and_no_side_file(
    tmp_path, book, monkeypatch
):
    path = book.path
    book.close()
    before = path.read_bytes()
    broken = schema.MIGRATIONS + ["CREATE TABLE extra (x); SELECT no_such_function();"]
    monkeypatch.setattr("store.db.book.MIGRATIONS", broken)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(broken))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(broken))
    with pytest.raises(BookError, match="left as it was"):
        open_book(path)
    assert path.read_bytes() == before  # the migration ran on a side copy only
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith("book.db")) == ["book.db"]


def test_backup_command_writes_a_checked_copy_and_never_overwrites(book, tmp_path, capsys):
    _note(book)
    dest = tmp_path / "usb" / "copy.db"
    assert copy_to(book.conn, dest) == dest
    assert _count(dest) == 1
    conn = sqlite3.connect(dest)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "delete"  # one file to carry
    conn.close()
    with pytest.raises(BookError, match="exists already"):
        copy_to(book.conn, dest)
    into_folder = copy_to(book.conn, tmp_path / "usb")
    assert into_folder.parent == tmp_path / "usb" and _count(into_folder) == 1
    assert main(["--db", str(book.path), "backup", str(tmp_path / "cli.db")]) == 0
    assert "backup written" in capsys.readouterr().out and _count(tmp_path / "cli.db") == 1
    assert not list(tmp_path.rglob("*.part"))


def test_restore_keeps_the_current_logbook_and_sees_through_open_books(book, tmp_path):
    _note(book, "in the backup")
    saved = copy_to(book.conn, tmp_path / "saved.db")
    _note(book, "after the backup")
    other_window = open_book(book.path)  # another sumpbook open on the same book
    try:
        kept = restore(saved, book.path)
        assert kept is not None and kept.parent == backup_dir(book.path)
        assert _count(kept) == 2
        notes = [e.note for e in journal.read(other_window)]
        assert notes == ["in the backup"]
        _note(other_window, "after the restore")  # and it can go on writing
    finally:
        other_window.close()
    assert [e.note for e in journal.read(book)] == ["in the backup", "after the restore"]
    # Rolling backups never prune the copy a restore kept.
    for i in range(3):
        _note(book, str(i))
        rolling_backup(book.conn, book.path, "on-close", keep=1)
    assert kept.exists() and len(rolling_backups(book.path)) == 1


def test_restore_checks_the_file_first(book, tmp_path):
    _note(book)
    before = book.path.read_bytes()
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"\x00" * 8192)
    newer = copy_to(book.conn, tmp_path / "newer.db")
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {schema.SCHEMA_VERSION + 1}")
    conn.commit()
    conn.close()
    with pytest.raises(NotALogbook):
        restore(junk, book.path)
    with pytest.raises(TooNew):
        restore(newer, book.path)
    with pytest.raises(BookError, match="the logbook itself"):
        restore(book.path, book.path)
    with pytest.raises(BookError):
        restore(tmp_path / "missing.db", book.path)
    assert book.path.read_bytes() == before
    assert (
        not list(backup_dir(book.path).glob("*before-restore*"))
        if backup_dir(book.path).exists()
        else True
    )


def test_restore_where_there_is_no_logbook_yet(book, tmp_path):
    _note(book)
    saved = copy_to(book.conn, tmp_path / "saved.db")
    fresh = tmp_path / "new-laptop" / "logbook.db"
    fresh.parent.mkdir()
    assert restore(saved, fresh) is None
    with open_book(fresh) as restored:
        assert restored.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == 1


def test_restore_command(book, tmp_path, capsys):
    _note(book)
    saved = copy_to(book.conn, tmp_path / "saved.db")
    _note(book)
    assert main(["--db", str(book.path), "restore", str(saved)]) == 0
    out = capsys.readouterr().out
    assert "previous logbook is kept as" in out
    assert book.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == 1
