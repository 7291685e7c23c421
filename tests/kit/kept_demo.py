"""The demo with its kept rows, and the ways tests move it on: its clock later, entries written
as another program would (no kept row touched), a filter whose kept row leans on like
positions' lives."""

from __future__ import annotations

import uuid
from dataclasses import replace
from datetime import timedelta
from pathlib import Path

from store import record
from store.base.timeutil import format_utc, parse_utc
from store.db.book import open_book
from store.derived import statuscache
from store.exchange.demo import create_demo
from store.ledger import journal

DEMO_CLOCK = "2026-11-27T12:30:00Z"  # where the demo's story ends (demo.db.sql)


def kept_demo(folder: Path) -> Path:
    """The demo with its caches filled at the end of its story (as `sumpbook rebuild`)."""
    path = folder / "demo.db"
    with create_demo(path) as book:
        record.rebuild(book)
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return path


def kept_copy(demo_file: Path, tmp_path: Path) -> Path:
    """A copy of the demo file with its caches made (as `sumpbook rebuild`)."""
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    with open_book(path, create=False) as book:
        record.rebuild(book)
    return path


def moved(path: Path, tmp_path: Path, later: timedelta) -> Path:
    """A copy of the book with its frozen clock moved on."""
    copy = tmp_path / "later.db"
    copy.write_bytes(path.read_bytes())
    with open_book(copy, create=False) as book:
        book.set_setting("clock", format_utc(parse_utc(DEMO_CLOCK) + later))
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return copy


def behind_the_hooks(book, entry) -> None:
    """Write an entry as a bulk load or another program would: no derived row kept."""
    entry = journal.validate(book, entry, book.now())
    entry = replace(entry, id=str(uuid.uuid4()), logged=book.now())
    with book.atomic():
        journal.insert(book, entry)


def pooling(book) -> tuple[str, str]:
    """A filter whose kept row leans on like positions' lives, and one of those positions."""
    reg = statuscache.register(book)
    for tag, key in book.conn.execute("SELECT filter, key FROM status_cache ORDER BY filter"):
        others = [t for t in reg.like.get(tag.upper(), ()) if t != tag.upper()]
        if not key.endswith(".own") and others:
            return tag.upper(), others[0]
    raise AssertionError("the demo has no filter pooling like positions' lives")
