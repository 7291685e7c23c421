"""Where an output may go: never onto an input. Export and backup write new files; these
refuse a target that is the live logbook, one of its companion files (-wal, -shm,
-journal, the damage record, the check note), one of its backups, or any existing SQLite file."""

from __future__ import annotations

import os
from pathlib import Path

from store.base.errors import BookError
from store.db.places import CHECK_SUFFIX, DAMAGE_SUFFIX, backup_dir

SQLITE_MAGIC = b"SQLite format 3\x00"
_COMPANIONS = ("-wal", "-shm", "-journal", DAMAGE_SUFFIX, CHECK_SUFFIX, ".incoming", ".loading")


def _real(path: Path) -> Path:
    return Path(os.path.realpath(path))


def _is_sqlite(path: Path) -> bool:
    try:
        with open(path, "rb") as handle:
            return handle.read(16) == SQLITE_MAGIC
    except OSError:
        return False


def refuse_input_as_output(dest: Path, book_path: Path, what: str) -> None:
    """BookError when writing `what` (e.g. "the export") to `dest` could overwrite the
    logbook at `book_path` or anything it depends on; nothing is written."""
    dest, book = _real(Path(dest)), _real(Path(book_path))
    reason = None
    if dest == book or (dest.exists() and book.exists() and os.path.samefile(dest, book)):
        reason = "it is the logbook itself"
    elif any(dest == Path(f"{book}{suffix}") for suffix in _COMPANIONS):
        reason = "it is a file SQLite or sumpbook keeps beside the logbook"
    elif _real(backup_dir(book)) in dest.parents and dest.exists():
        reason = "it is one of the logbook's backups"
    elif dest.is_file() and _is_sqlite(dest):
        reason = "it is an SQLite database (a logbook or a backup?)"
    if reason:
        raise BookError(
            f"{what} was not written to {dest}: {reason}; nothing was written; "
            "choose a new file name"
        )
