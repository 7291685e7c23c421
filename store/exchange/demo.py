"""The demo plant: a plain-SQL logbook shipped as demo.db.sql at the top of the repo."""

from __future__ import annotations

import os
import shutil
import sqlite3
import tempfile
import time
from pathlib import Path

from store.base.errors import BookError
from store.base.session import Clock
from store.db.backup import remove_side_file, swap_in
from store.db.book import Book, open_book
from store.db.proof import prove_file

# At the top of a checkout (editable install), or inside the package (wheel install).
SQL_PATH = Path(__file__).resolve().parents[2] / "demo.db.sql"
SQL_PATHS = (SQL_PATH, Path(__file__).resolve().parent / "demo.db.sql")


def demo_sql() -> str:
    for path in SQL_PATHS:
        if path.is_file():
            return path.read_text(encoding="utf-8")
    raise BookError(f"the demo plant file is missing (looked for {SQL_PATHS[0]})")


def load_sql(book: Book, sql: str) -> None:
    """Run a data-only SQL script (INSERTs) into a freshly migrated book, all or nothing."""
    if book.conn.execute("SELECT count(*) FROM units").fetchone()[0]:
        raise BookError("the demo goes only into an empty logbook")
    try:
        book.conn.executescript("BEGIN IMMEDIATE;\n" + sql + "\nCOMMIT;")
    except sqlite3.Error as exc:
        if book.conn.in_transaction:
            book.conn.execute("ROLLBACK")
        raise BookError(f"the demo SQL did not load: {exc}") from exc


def create_demo(path: Path, force: bool = False, clock: Clock | None = None) -> Book:
    """Write the demo plant to `path`. An existing logbook is kept unless `force`; with it,
    the demo is built beside the book, proven like a restore (`store.db.proof`), the book
    kept as `<name>-backups/<name>-before-demo-…db` and the demo swapped in
    (`store.db.backup.swap_in`); any failure leaves the book as it was."""
    path = Path(path)
    existing = path.exists() and path.stat().st_size > 0
    if existing and not force:
        raise BookError(f"{path} exists already: add --force to replace it with the demo")
    sql = demo_sql()
    tmp = path.with_name(path.name + ".loading")
    remove_side_file(tmp)
    kept = None
    try:
        book = open_book(tmp)
        try:
            load_sql(book, sql)
            book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
            book.conn.execute("PRAGMA journal_mode = DELETE")
        finally:
            book.close()
        if existing:
            prove_file(tmp, "the demo plant built beside it")
            kept = swap_in(tmp, path, "before-demo")
        else:
            for suffix in ("-wal", "-shm", "-journal"):
                Path(str(path) + suffix).unlink(missing_ok=True)
            os.replace(tmp, path)
    finally:
        remove_side_file(tmp)
    book = open_book(path, clock=clock)
    if kept is not None:
        book.notices.append(f"the logbook that was there is kept as {kept}")
    return book


THROWAWAY_PREFIX = "sumpbook-throwaway-"  # the temporary folders of throw-away books
# A throw-away folder with nothing written in it for this long was left by an app that never
# closed (its terminal window shut under it, the laptop's power gone): the next one removes it.
# (An app left open that long on a demo it has not written to loses that copy, which was
# never kept anyway.)
LEFT_BEHIND_S = 2 * 24 * 3600


def _throwaway_folder() -> Path:
    sweep_left_behind()
    return Path(tempfile.mkdtemp(prefix=THROWAWAY_PREFIX))


def sweep_left_behind() -> list[Path]:
    """Remove the throw-away folders in the temporary folder whose newest file is older
    than LEFT_BEHIND_S (a demo copy is 1.4 MB, and a temporary folder that is never emptied
    keeps every one an app killed left); nothing else, and nothing that cannot be looked
    at. Returns the folders removed."""
    now_s, removed = time.time(), []
    try:
        found = [p for p in Path(tempfile.gettempdir()).resolve().iterdir()
                 if p.name.startswith(THROWAWAY_PREFIX)]  # fmt: skip
    except OSError:
        return removed
    for folder in found:
        try:
            if folder.is_symlink() or not folder.is_dir() or not _throwaway_folder_is(folder):
                continue
            newest = max([folder.stat().st_mtime, *(p.stat().st_mtime for p in folder.iterdir())])
        except OSError:
            continue
        if now_s - newest > LEFT_BEHIND_S:
            shutil.rmtree(folder, ignore_errors=True)
            removed.append(folder)
    return removed


def throwaway_demo(clock: Clock | None = None) -> Book:
    """A fresh copy of the demo plant in a new temporary folder, for the app to open when
    no logbook exists yet: its story starts where it was frozen every time, and nothing
    logged in it is kept (`discard` removes it when the app closes or moves on)."""
    return create_demo(_throwaway_folder() / "demo.db", clock=clock)


def throwaway_empty(clock: Clock | None = None) -> Book:
    """An empty book in a new temporary folder: what the app stands on while it asks
    whether to create a logbook that does not exist yet."""
    return open_book(_throwaway_folder() / "empty.db", clock=clock)


def is_throwaway(path: Path) -> bool:
    return _throwaway_folder_is(Path(path).resolve().parent)


def _throwaway_folder_is(folder: Path) -> bool:
    """Whether `folder` (resolved) is one of ours: named so, directly in the temporary folder."""
    return (
        folder.name.startswith(THROWAWAY_PREFIX)
        and folder.parent == Path(tempfile.gettempdir()).resolve()
    )


def discard(path: Path) -> None:
    """Remove a throw-away book's folder (its copies and backups with it); nothing else."""
    if is_throwaway(path):
        shutil.rmtree(Path(path).resolve().parent, ignore_errors=True)
