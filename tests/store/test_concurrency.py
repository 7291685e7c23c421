"""Two at once: two sumpbook processes on one logbook. Reads go on while the other writes;
writes wait for each other (busy timeout) and never fail silently; nothing is lost."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError
from store.db.book import open_book
from store.ledger import journal, register
from store.ledger.entries import Note
from store.ledger.register import Technician
from tests.kit.crash_writer import parse_report, read_all, run_child, wait_for_commits, warm_up

PER_WRITER = 40
FIRST_STEP_IS_A_BATCH = 1  # a seed whose first random draw makes crash_writer write a batch
REPO = Path(__file__).resolve().parents[2]
pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork")


def _count(book) -> int:
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def test_two_writers_at_once_lose_nothing_and_readers_go_on(tmp_path, book):
    warm_up(tmp_path)
    start = _count(book)
    book.close()  # no connection of ours may cross the fork
    children = dict(run_child(book.path, seed=s, limit=PER_WRITER, tag=f"w{s}") for s in (2, 3))
    statuses: dict[int, int] = {}
    reads = []
    with open_book(book.path) as reader:  # a third instance, only reading, all along
        while len(statuses) < len(children):
            for pid in children.keys() - statuses.keys():
                done, status = os.waitpid(pid, os.WNOHANG)
                if done:
                    statuses[pid] = status
            reads.append(_count(reader))
    committed: set[str] = set()
    for fd in children.values():
        ids, _, errors = parse_report(read_all(fd))
        assert not errors, errors
        committed |= ids
    assert all(os.WIFEXITED(s) and os.WEXITSTATUS(s) == 0 for s in statuses.values())
    with open_book(book.path) as after:
        present = {r[0] for r in after.conn.execute("SELECT id FROM entries")}
        assert after.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert committed <= present  # every reported entry is there...
    assert len(present) == start + len(committed)  # ...and nothing else
    assert len(committed) >= 2 * PER_WRITER  # each writer made PER_WRITER calls
    assert reads and reads == sorted(reads)  # the reader never failed, never went back


HOLD_LOCK = """
import sqlite3, sys
conn = sqlite3.connect(sys.argv[1], isolation_level=None)
conn.execute("BEGIN IMMEDIATE")
print("locked", flush=True)
sys.stdin.readline()  # not EOF: a forked writer holds a copy of our stdin pipe
conn.execute("COMMIT")
"""


def test_a_writer_waits_for_the_lock_instead_of_failing(tmp_path, book):
    warm_up(tmp_path)
    book.close()
    # Another instance in the middle of a write: a process holding the write lock.
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLD_LOCK, str(book.path)],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "locked"
        pid, fd = run_child(book.path, seed=FIRST_STEP_IS_A_BATCH, limit=3)
        announced = b""
        while b"B " not in announced:  # the writer is about to write its first batch
            chunk = os.read(fd, 4096)
            assert chunk, "the writer ended early"
            announced += chunk
        time.sleep(0.3)
        # While the lock is held nothing can commit: no 'C' line, and no error either.
        announced += wait_for_commits(fd, 1, timeout_s=0.01)
        assert b"C " not in announced and b"E " not in announced
        with open_book(book.path) as reader:
            assert _count(reader) == 0  # reads go on meanwhile
    finally:
        holder.communicate("go\n", timeout=30)  # the holder commits and ends
    _, status = os.waitpid(pid, 0)
    ids, _, errors = parse_report(announced.decode() + read_all(fd))
    assert not errors and os.WIFEXITED(status) and os.WEXITSTATUS(status) == 0
    with open_book(book.path) as after:
        assert {r[0] for r in after.conn.execute("SELECT id FROM entries")} == ids
        assert len(ids) >= 3


def test_a_write_that_cannot_get_the_lock_says_so_and_keeps_the_entry(book):
    other = open_book(book.path)
    try:
        other.conn.execute("BEGIN IMMEDIATE")
        book.conn.execute("PRAGMA busy_timeout = 100")  # instead of waiting 10 s in a test
        entry = Note(unit="P1", note="pump noisy at start", by="AB")
        with pytest.raises(BookError, match="busy") as refused:
            record.log(book, entry)
        assert "nothing was saved" in str(refused.value) and "\n" not in str(refused.value)
        with pytest.raises(BookError, match="busy"):
            register.add(book, Technician(tag="EF"), by="AB")
        other.conn.execute("ROLLBACK")
    finally:
        other.close()
    saved = record.log(book, entry)  # the same entry, kept by the caller, saves now
    assert [e.note for e in journal.read(book)] == [saved.note] == ["pump noisy at start"]


def _wait_until_open(pid: int, path: Path, limit_s: float = 30.0) -> None:
    """Until process `pid` has `path` open (Linux /proc; elsewhere a fixed pause)."""
    fd_dir = Path(f"/proc/{pid}/fd")
    if not fd_dir.exists():
        time.sleep(2.0)
        return
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        try:
            if any(os.path.realpath(link) == str(path.resolve()) for link in fd_dir.iterdir()):
                return
        except OSError:
            return  # the process ended: its exit code will tell
        time.sleep(0.02)


def test_the_command_line_waits_for_the_app(book):
    """A CLI `log` while another instance holds the write lock waits, then writes."""
    holder = open_book(book.path)
    holder.conn.execute("BEGIN IMMEDIATE")
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    cli = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "tui",
            "--db",
            str(book.path),
            "log",
            "note",
            "waited",
            "--unit",
            "P1",
            "--by",
            "AB",
        ],
        cwd=REPO,
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        _wait_until_open(cli.pid, book.path)
        time.sleep(0.2)  # it has the book open: now it is at (or near) its write
        holder.conn.execute("COMMIT")
        out, err = cli.communicate(timeout=60)
    finally:
        holder.close()
        if cli.poll() is None:
            cli.kill()
    assert cli.returncode == 0, err
    assert [e.note for e in journal.read(book)] == ["waited"]
