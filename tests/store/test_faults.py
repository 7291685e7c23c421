"""Full disk and read-only media: the write fails with a clear message, the caller keeps
what it tried to save, and the book stays valid. Simulated with `PRAGMA max_page_count` (a
full disk) and a write-protected file or folder."""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
import stat
import tempfile
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError
from store.db.book import open_book
from store.exchange.csvio import import_csv
from store.ledger import journal, register
from store.ledger.entries import Note, Reading
from store.ledger.register import Technician
from tests.kit.crash_writer import warm_up
from tests.kit.plant import fill_register

NOBODY = 65534  # the conventional unprivileged uid/gid on Linux  # common practice, no source


def _fill_disk(book) -> int:
    """Cap the file at its current size plus two pages: the next big writes do not fit."""
    pages = book.conn.execute("PRAGMA page_count").fetchone()[0]
    book.conn.execute(f"PRAGMA max_page_count = {pages + 2}")
    return pages


def _count(book) -> int:
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def test_a_full_disk_refuses_the_write_clearly_and_keeps_the_entry(book):
    _fill_disk(book)
    saved = []
    entry = None
    with pytest.raises(BookError) as refused:
        for i in range(200):
            entry = Note(unit="P1", note=f"round {i} " + "x" * 1500, by="AB")
            saved.append(record.log(book, entry).id)
    message = str(refused.value)
    assert "full" in message and "nothing was saved" in message and "\n" not in message
    assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    ids = {r[0] for r in book.conn.execute("SELECT id FROM entries")}
    assert ids == set(saved)  # all that was reported saved, and nothing half-written
    # The form's data is still there: the same entry saves once space is free again.
    book.conn.execute("PRAGMA max_page_count = 1000000")
    again = record.log(book, entry)
    assert journal.find_entry(book, again.id).note == entry.note


def test_a_full_disk_rejects_a_whole_batch(book):
    record.log(book, Note(unit="P1", note="before", by="AB"))
    _fill_disk(book)
    batch = [Note(unit="P1", note="y" * 1500, by="AB") for _ in range(20)]
    with pytest.raises(BookError, match="full"):
        record.log_many(book, batch)
    assert _count(book) == 1
    with pytest.raises(BookError, match="full"):
        import_csv(
            book,
            (
                "time,kind,target,by,note\n"
                # distinct rows: rows alike in every cell are one entry (content ids)
                + "".join(f"2026-01-05T07:{i:02d}Z,note,P1,AB,{'z' * 1900}\n" for i in range(20))
            ).encode(),
            book.local_zone(),
        )
    assert _count(book) == 1
    assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_errors_that_are_bugs_are_not_dressed_up(book):
    # Only refusals of the file become BookError; a mistake in SQL stays a loud error.
    with pytest.raises(sqlite3.OperationalError):
        with book.atomic():
            book.conn.execute("INSERT INTO no_such_table VALUES (1)")
    assert not book.conn.in_transaction


# ---- read-only --------------------------------------------------------------------------------


def _in_child_as_nobody(work) -> dict:
    """Run `work()` in a forked child without root's power to write anything (when the
    tests run as root); returns what it reported."""
    read_fd, write_fd = os.pipe()
    pid = os.fork()
    if pid == 0:
        result: dict = {}
        try:
            os.close(read_fd)
            if os.geteuid() == 0:
                os.setgid(NOBODY)
                os.setuid(NOBODY)
            result = work()
        except BaseException as exc:  # report it; the parent asserts
            result = {"crash": f"{type(exc).__name__}: {exc}"}
        finally:
            os.write(write_fd, json.dumps(result).encode())
            os._exit(0)
    os.close(write_fd)
    chunks = []
    while chunk := os.read(read_fd, 65536):
        chunks.append(chunk)
    os.close(read_fd)
    os.waitpid(pid, 0)
    return json.loads(b"".join(chunks) or b"{}")


@pytest.fixture
def shelf():
    """A folder outside root-only places, so that an unprivileged child can read it (in
    /tmp where the temporary folder is one others cannot enter)."""
    base = tempfile.gettempdir()
    base = base if os.stat(base).st_mode & 0o001 else "/tmp"
    folder = Path(tempfile.mkdtemp(prefix="sumpbook-ro-", dir=base))
    folder.chmod(0o755)
    yield folder
    for p in [folder, *folder.rglob("*")]:
        p.chmod(0o755 if p.is_dir() else 0o644)
    shutil.rmtree(folder)


@pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork")
@pytest.mark.parametrize("medium", ["write-protected file", "read-only folder"])
def test_a_read_only_logbook_opens_for_reading_and_refuses_writes_clearly(shelf, medium):
    warm_up(shelf / "warm")  # imports done before the child loses access to them
    path = shelf / "logbook.db"
    with open_book(path) as book:
        fill_register(book)
        record.log(book, Reading(filter="P1-RF", dp_bar=0.9, by="AB"))
    path.chmod(stat.S_IRUSR | stat.S_IRGRP | stat.S_IROTH)
    if medium == "read-only folder":
        shelf.chmod(0o555)
    before = path.read_bytes()
    entry = Note(unit="P1", note="written on the shelf", by="AB")

    def work() -> dict:
        book = open_book(path)
        report = {"readonly": book.readonly, "count": _count(book)}
        for name, attempt in [
            ("log", lambda: record.log(book, entry)),
            ("register", lambda: register.add(book, Technician(tag="EF"))),
            ("setting", lambda: book.set_setting("name", "Plant 2")),
        ]:
            try:
                attempt()
                report[name] = "written"
            except BookError as exc:
                report[name] = str(exc)
        report["check"] = book.conn.execute("PRAGMA quick_check").fetchone()[0]
        book.close()
        return report

    report = _in_child_as_nobody(work)
    assert "crash" not in report, report
    assert report["readonly"] is True and report["count"] == 1 and report["check"] == "ok"
    for name in ("log", "register", "setting"):
        assert "read-only" in report[name] and "nothing was saved" in report[name], report
    assert path.read_bytes() == before
    # The entry was kept by the caller: once the file is writable again it saves.
    shelf.chmod(0o755)
    path.chmod(0o644)
    with open_book(path) as book:
        assert not book.readonly
        record.log(book, entry)
        assert _count(book) == 2
