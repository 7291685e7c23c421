"""Rolling backups through SQLite's online backup API."""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime
from pathlib import Path

from .errors import BookError

DEFAULT_KEEP = 10


def backup_dir(book_path: Path) -> Path:
    return book_path.parent / f"{book_path.stem}-backups"


def copy_to(conn: sqlite3.Connection, dest: Path) -> Path:
    """Write a consistent copy of the open logbook to `dest` (never over an existing file)."""
    dest = Path(dest)
    if dest.exists():
        raise BookError(f"{dest} exists already: choose a new file name")
    dest.parent.mkdir(parents=True, exist_ok=True)
    tmp = dest.with_name(dest.name + ".part")
    target = sqlite3.connect(tmp)
    try:
        conn.backup(target)
        target.execute("PRAGMA journal_mode = DELETE")
    finally:
        target.close()
    tmp.replace(dest)
    return dest


def rolling_backup(
    conn: sqlite3.Connection, book_path: Path, why: str, keep: int = DEFAULT_KEEP
) -> Path:
    """Add a dated copy beside the logbook and drop the oldest beyond `keep`."""
    folder = backup_dir(book_path)
    stamp = datetime.now(UTC).strftime("%Y%m%dT%H%M%S%fZ")
    dest = copy_to(conn, folder / f"{book_path.stem}-{stamp}-{why}.db")
    copies = sorted(folder.glob(f"{book_path.stem}-*.db"))
    for old in copies[: max(0, len(copies) - keep)]:
        old.unlink(missing_ok=True)
    return dest


def latest_backup(book_path: Path) -> Path | None:
    copies = sorted(backup_dir(book_path).glob(f"{book_path.stem}-*.db"))
    return copies[-1] if copies else None


def backup_before_migration(conn: sqlite3.Connection, book_path: Path, version: int) -> Path:
    return rolling_backup(conn, book_path, f"before-v{version}-upgrade")
