"""Crash safety: a writer killed with SIGKILL at random moments loses nothing it reported.

The writer (tests/kit/crash_writer.py) reports each entry after `journal.log` returned. After
every kill the book must open, pass `PRAGMA integrity_check`, hold every reported entry,
and hold each three-entry batch whole or not at all. SIGKILL tests the process dying, not
the power failing (that is what `synchronous = FULL` is for, and cannot be tested here).
"""

from __future__ import annotations

import os
import random
import signal
import sqlite3
import time

import pytest

from store.db.book import open_book
from tests.kit.crash_writer import parse_report, read_all, run_child, wait_for_commits, warm_up
from tests.kit.plant import fill_register

KILLS = 24
pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork and SIGKILL")


def _kill(pid: int, fd: int, commits_first: int, delay_s: float) -> str:
    """Let the writer report `commits_first` commits, wait `delay_s`, then SIGKILL it."""
    early = wait_for_commits(fd, commits_first) if commits_first else b""
    time.sleep(delay_s)
    os.kill(pid, signal.SIGKILL)
    _, status = os.waitpid(pid, 0)
    report = early.decode("utf-8") + read_all(fd)
    # The writer must have been killed, not stopped by an error of its own.
    assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL, report
    return report


def _ids(path) -> set[str]:
    conn = sqlite3.connect(path)
    try:
        return {r[0] for r in conn.execute("SELECT id FROM entries")}
    finally:
        conn.close()


def test_killed_writers_lose_no_committed_entry(tmp_path):
    warm_up(tmp_path)
    path = tmp_path / "book.db"
    with open_book(path) as book:
        fill_register(book)
    rng = random.Random(4406)
    committed_total: set[str] = set()
    killed_after_commits = 0
    for round_no in range(KILLS):
        # Every fourth kill comes at once (while the book opens); the rest after a random
        # number of commits and a random pause, so they land anywhere in a write.
        early = round_no % 4 == 0
        commits_first = 0 if early else rng.randint(1, 6)
        delay = rng.uniform(0.0, 0.003) if early else rng.uniform(0.0, 0.02)
        pid, fd = run_child(path, seed=round_no, tag=f"r{round_no}")
        report = _kill(pid, fd, commits_first, delay)
        committed, batches, errors = parse_report(report)
        assert not errors, errors
        killed_after_commits += bool(committed)
        committed_total |= committed

        with open_book(path, create=False) as book:
            assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            present = {r[0] for r in book.conn.execute("SELECT id FROM entries")}
            assert book.conn.execute("PRAGMA foreign_key_check").fetchall() == []
        missing = committed_total - present
        assert not missing, f"round {round_no}: {len(missing)} committed entries lost"
        for batch in batches:
            landed = [i in present for i in batch]
            assert all(landed) or not any(landed), f"round {round_no}: a batch landed in part"
    # The test only proves something if most kills hit a writer that was writing.
    assert killed_after_commits >= KILLS - KILLS // 4
    assert len(committed_total) >= KILLS


def test_a_kill_while_the_book_is_first_created_leaves_a_usable_file(tmp_path):
    """A creation cut short must not leave a file that is then refused as 'not a logbook'."""
    rng = random.Random(3448)
    for round_no in range(8):
        path = tmp_path / f"new{round_no}.db"
        read_fd, write_fd = os.pipe()
        pid = os.fork()
        if pid == 0:  # child: create the book and its register, as fast as it can
            try:
                os.close(read_fd)
                with open_book(path) as book:
                    os.write(write_fd, b"created\n")
                    fill_register(book)
                    os.write(write_fd, b"filled\n")
            finally:
                os._exit(0)
        os.close(write_fd)
        time.sleep(rng.uniform(0.0, 0.02))
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        said = read_all(read_fd)
        with open_book(path) as book:  # must open (or create) it, never refuse it
            assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            if "created" in said:
                assert book.conn.execute("PRAGMA application_id").fetchone()[0] != 0
            if "filled" in said:
                assert book.conn.execute("SELECT count(*) FROM filters").fetchone()[0] == 2
    assert _ids(tmp_path / "new0.db") == set()
