"""Restore and backup hold the book's write lock for their whole run: a program saving at the
same time waits (or, after the busy timeout, says nothing was saved), and every entry it
reported saved is in the restored book or in the copy kept before the restore."""

from __future__ import annotations

import os
import signal
import sqlite3
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError
from store.db.backup import restore, rolling_backup
from store.db.book import open_book
from store.ledger import journal
from store.ledger.entries import Note
from tests.kit.crash_writer import parse_report, read_all, run_child, wait_for_commits, warm_up

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork and SIGKILL")


def _ids(path: Path) -> set[str]:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return {r[0] for r in conn.execute("SELECT id FROM entries")}
    finally:
        conn.close()


def _fill(book, count: int) -> None:
    record.log_many(
        book, [Note(unit="P1", note=f"old round {i} " + "x" * 300, by="AB") for i in range(count)]
    )


@pytest.mark.parametrize("rounds", [3])
def test_restore_under_a_writer_loses_nothing_reported_saved(tmp_path, book, rounds):
    warm_up(tmp_path)
    _fill(book, 3000)  # a copy big enough that the writer meets the restore mid-way
    copy = rolling_backup(book.conn, book.path, "on-close")
    book.close()  # no connection of ours may cross the fork
    pid, fd = run_child(book.path, seed=5, tag="during")
    report = wait_for_commits(fd, 20).decode()
    kept: list[Path] = []
    for _ in range(rounds):
        kept.append(restore(copy, book.path))  # type: ignore[arg-type]
        report += wait_for_commits(fd, 10).decode()  # the writer goes on after each
    os.kill(pid, signal.SIGKILL)
    os.waitpid(pid, 0)
    committed, _, errors = parse_report(report + read_all(fd))
    assert not errors, errors
    present = _ids(book.path).union(*(_ids(k) for k in kept))
    lost = committed - present
    assert not lost, f"{len(lost)} reported-saved entries lost"
    assert len(committed) >= 20 + 10 * rounds
    with open_book(book.path) as after:
        assert after.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_a_writer_waits_while_the_restore_holds_the_book(tmp_path, book, monkeypatch):
    """While the copy is written the book's write lock is held: a save from another
    connection waits for it (here refused at once: busy timeout 0) and reading goes on."""
    _fill(book, 200)
    copy = rolling_backup(book.conn, book.path, "on-close")
    seen: list[str] = []
    other = sqlite3.connect(book.path, timeout=0, isolation_level=None)
    reader = sqlite3.connect(book.path, timeout=0, isolation_level=None)
    from store.db import backup as backup_module

    original = backup_module.copy_to

    def copy_and_probe(conn, dest, **how):
        result = original(conn, dest, **how)
        try:
            other.execute("BEGIN IMMEDIATE")
            other.execute("ROLLBACK")
            seen.append("a writer got in")
        except sqlite3.OperationalError as exc:
            seen.append(f"writer: {exc}")
        seen.append(f"reader: {reader.execute('SELECT count(*) FROM entries').fetchone()[0]}")
        return result

    monkeypatch.setattr(backup_module, "copy_to", copy_and_probe)
    restore(copy, book.path)
    assert seen == ["writer: database is locked", "reader: 200"]
    other.close()
    reader.close()


def test_the_backup_command_holds_the_book_while_it_copies(tmp_path, book, monkeypatch):
    from store.db import backup as backup_module
    from tui.cli import main

    _fill(book, 50)
    dest = tmp_path / "copy.db"
    other = sqlite3.connect(book.path, timeout=0, isolation_level=None)
    seen: list[str] = []
    original = backup_module.copy_to

    def copy_and_probe(conn, where, **how):
        try:
            other.execute("BEGIN IMMEDIATE")
            other.execute("ROLLBACK")
            seen.append("a writer got in")
        except sqlite3.OperationalError as exc:
            seen.append(f"writer: {exc}")
        return original(conn, where, **how)

    monkeypatch.setattr(backup_module, "copy_to", copy_and_probe)
    assert main(["--db", str(book.path), "backup", str(dest)]) == 0
    assert seen == ["writer: database is locked"]
    assert _ids(dest) == _ids(book.path)
    other.execute("BEGIN IMMEDIATE")  # and free again afterwards
    other.execute("ROLLBACK")
    other.close()
    with pytest.raises(BookError, match="exists already"):
        original(book.conn, dest)


def test_a_book_open_on_a_file_that_was_replaced_refuses_to_write(tmp_path, book):
    # What a restore of a damaged book does: a new file takes the old one's name. A program
    # that still has the old file open would write into a file no one sees again.
    _fill(book, 5)
    copy = rolling_backup(book.conn, book.path, "on-close")
    new = tmp_path / "new.db"
    new.write_bytes(copy.read_bytes())
    os.replace(new, book.path)
    with pytest.raises(BookError, match="was replaced") as refused:
        record.log(book, Note(unit="P1", note="into the old file", by="AB"))
    assert "nothing was saved" in str(refused.value)
    book.close()
    with open_book(book.path) as again:  # opened again, it writes
        record.log(again, Note(unit="P1", note="into the new file", by="AB"))
        assert journal.count(again) == 6


def test_a_save_meeting_a_restore_of_a_rollback_mode_book_is_kept_or_restored(
    tmp_path, monkeypatch
):
    """A book in rollback-journal mode (a copy no sumpbook has open, as `backup` writes) is
    kept and overwritten under one write lock: a save by another process that gets in once
    the kept copy is made lands in the restored book after it, never between the two (where
    it would be in neither file: what a keep under one lock and an overwrite under a second
    one allowed)."""
    import subprocess
    import sys
    import time
    import types

    from store.db import backup as backup_module
    from store.db.backup import copy_to
    from tests.kit.plant import fill_register

    with open_book(tmp_path / "w.db") as first:
        fill_register(first)
        _fill(first, 300)
        live = copy_to(first.conn, tmp_path / "live.db")  # rollback-journal mode
        source = copy_to(first.conn, tmp_path / "source.db")
    assert live.read_bytes()[18] == 1  # SQLite file format: 1 rollback journal, 2 WAL
    writer: list[int] = []

    # another process (started fresh: SQLite's locks do not survive a fork) that spins until
    # the book's write lock is free, then saves and says so
    writer_code = (
        "import sqlite3, sys, time, pathlib\n"
        "conn = sqlite3.connect(sys.argv[1], timeout=0, isolation_level=None)\n"
        "deadline = time.monotonic() + 20\n"
        "while time.monotonic() < deadline:\n"
        "    try:\n"
        "        conn.execute('BEGIN IMMEDIATE')\n"
        "        conn.execute(\"INSERT INTO settings (key, value) VALUES ('probe', 'x')\")\n"
        "        conn.execute('COMMIT')\n"
        "    except sqlite3.OperationalError:\n"
        "        if conn.in_transaction:\n"
        "            conn.execute('ROLLBACK')\n"
        "        continue\n"
        "    pathlib.Path(sys.argv[2]).touch()\n"
        "    sys.exit(0)\n"
        "sys.exit(1)\n"
    )
    saved = tmp_path / "saved"
    writer: list[subprocess.Popen] = []

    def then_race(keep):  # once the kept copy is made, a writer process starts waiting
        def keep_then_race(*args, **how):
            result = keep(*args, **how)
            if "before-restore" in str(args[-1]) and not writer:
                writer.append(
                    subprocess.Popen([sys.executable, "-c", writer_code, str(live), str(saved)])
                )
            return result

        return keep_then_race

    def connect_after_the_writer(*args, **kwargs):
        # a connection to the book opened once the kept copy is made gives the waiting
        # writer its chance first: it saves now if the book's lock is free
        if writer and Path(str(args[0])) == live:
            deadline = time.monotonic() + 5
            while time.monotonic() < deadline and not saved.exists():
                time.sleep(0.01)
        return sqlite3.connect(*args, **kwargs)

    shim = types.SimpleNamespace(**{**vars(sqlite3), "connect": connect_after_the_writer})
    monkeypatch.setattr(backup_module, "copy_to", then_race(backup_module.copy_to))
    if hasattr(backup_module, "_keep_bytes"):  # how a rollback-journal book is kept
        monkeypatch.setattr(backup_module, "_keep_bytes", then_race(backup_module._keep_bytes))
    monkeypatch.setattr(backup_module, "sqlite3", shim)
    kept = restore(source, live)
    assert writer[0].wait(timeout=30) == 0  # the save was made and reported

    def has_probe(path: Path) -> bool:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        try:
            return conn.execute("SELECT count(*) FROM settings WHERE key = 'probe'").fetchone()[0]
        finally:
            conn.close()

    assert has_probe(live) or has_probe(kept)  # type: ignore[arg-type]
