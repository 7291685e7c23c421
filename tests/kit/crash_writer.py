"""A child process that logs entries as fast as it can, for the crash and concurrency tests.

It reports on a pipe, one line per event, each line written with one `os.write` (shorter
than PIPE_BUF, so a line is whole or absent even when the process is killed):

    B id1 id2 id3   a batch is about to be written (log_many, all or nothing)
    C id1 [id2 …]   these entries are committed: the call that wrote them has returned
    E message       the writer stopped on an error (a test counts this as a failure)
"""

from __future__ import annotations

import os
import random
import select
import traceback
import uuid
from pathlib import Path

from store import record
from store.db.book import open_book
from store.ledger.entries import Note, Reading


def _say(fd: int, line: str) -> None:
    os.write(fd, (line + "\n").encode("utf-8"))


def write_entries(path: Path, fd: int, seed: int, limit: int | None = None, tag: str = "") -> None:
    """Log readings, notes and three-entry batches into the book at `path` until killed
    (or until `limit` calls have returned). The book must hold unit P1, filter P1-RF and
    technician AB (tests/kit/plant.py fill_register)."""
    rng = random.Random(seed)
    try:
        book = open_book(path, create=False)
        done = 0
        while limit is None or done < limit:
            choice = rng.random()
            if choice < 0.2:
                batch = [
                    Note(id=str(uuid.uuid4()), unit="P1", by="AB", note=f"{tag} batch {done}.{i}")
                    for i in range(3)
                ]
                ids = " ".join(e.id for e in batch)
                _say(fd, f"B {ids}")
                record.log_many(book, batch)
                _say(fd, f"C {ids}")
            elif choice < 0.6:
                entry = record.log(
                    book,
                    Reading(filter="P1-RF", dp_bar=round(rng.uniform(0.3, 2.4), 3), by="AB"),
                )
                _say(fd, f"C {entry.id}")
            else:
                entry = record.log(
                    book,
                    Note(unit="P1", by="AB", note=f"{tag} note {done} " + "x" * rng.randrange(400)),
                )
                _say(fd, f"C {entry.id}")
            done += 1
        book.close()
    except BaseException as exc:  # report, never hide: the test fails on any E line
        _say(fd, "E " + " | ".join(traceback.format_exception_only(exc)).strip().replace("\n", " "))
        raise


def warm_up(folder: Path) -> None:
    """Write once in a throwaway book, so that everything the first write imports lazily
    (the status maths) is loaded before forking: the children then write at full speed."""
    from tests.kit.plant import fill_register

    with open_book(folder / "warm-up.db") as book:
        fill_register(book)
        record.log(book, Reading(filter="P1-RF", dp_bar=1.0, by="AB"))
        record.log_many(book, [Note(unit="P1", by="AB", note="warm-up")])


def run_child(path: Path, seed: int, limit: int | None = None, tag: str = "") -> tuple[int, int]:
    """Fork a writer; returns (pid, read end of its pipe). The child never returns."""
    read_fd, write_fd = os.pipe()
    pid = os.fork()
    if pid == 0:  # child
        code = 0
        try:
            os.close(read_fd)
            write_entries(path, write_fd, seed, limit, tag)
        except BaseException:
            code = 1
        finally:
            os._exit(code)
    os.close(write_fd)
    return pid, read_fd


def wait_for_commits(fd: int, count: int, timeout_s: float = 20.0) -> bytes:
    """Read a writer's report until `count` more commits are reported (or it stops talking
    for `timeout_s`); returns what was read, for parse_report."""
    seen = b""
    while seen.count(b"C ") < count:
        ready, _, _ = select.select([fd], [], [], timeout_s)
        chunk = os.read(fd, 65536) if ready else b""
        if not chunk:
            break  # the writer ended or hung: the caller's assertions will say
        seen += chunk
    return seen


def read_all(fd: int) -> str:
    """Everything the child wrote, up to end of file (the child has ended)."""
    chunks = []
    while chunk := os.read(fd, 65536):
        chunks.append(chunk)
    os.close(fd)
    return b"".join(chunks).decode("utf-8")


def parse_report(text: str) -> tuple[set[str], list[list[str]], list[str]]:
    """(committed ids, batches announced, error lines) from a writer's report."""
    committed: set[str] = set()
    batches: list[list[str]] = []
    errors: list[str] = []
    for line in text.splitlines():
        kind, _, rest = line.partition(" ")
        if kind == "C":
            committed.update(rest.split())
        elif kind == "B":
            batches.append(rest.split())
        elif kind == "E":
            errors.append(rest)
    return committed, batches, errors
