"""Where a logbook's companion files live beside it: the folder of rolling backups and the
marker a failed check leaves. File names only; nothing here opens the book."""

from __future__ import annotations

import re
from pathlib import Path


def backup_dir(book_path: Path) -> Path:
    return book_path.parent / f"{book_path.stem}-backups"


def _rolling_name(book_path: Path) -> re.Pattern[str]:
    return re.compile(rf"^{re.escape(book_path.stem)}-\d{{8}}T\d{{12}}Z-[\w.-]+\.db$")


def rolling_backups(book_path: Path) -> list[Path]:
    """The rolling copies of the logbook at `book_path`, oldest first."""
    folder = backup_dir(book_path)
    if not folder.is_dir():
        return []
    pattern = _rolling_name(book_path)
    return sorted(p for p in folder.iterdir() if pattern.match(p.name))


def latest_backup(book_path: Path) -> Path | None:
    """The newest rolling copy (not the copies kept by a restore)."""
    copies = rolling_backups(Path(book_path))
    return copies[-1] if copies else None


def _kept_copies(book_path: Path) -> list[Path]:
    """Copies kept by a restore or a demo over the book, oldest first (by their stamp)."""
    folder = backup_dir(book_path)
    if not folder.is_dir():
        return []
    pattern = re.compile(rf"^{re.escape(book_path.stem)}-before-[\w-]+-(\d{{8}}T\d{{12}}Z)\.db$")
    found = [(m.group(1), p) for p in folder.iterdir() if (m := pattern.match(p.name))]
    return [p for _, p in sorted(found)]


def backup_hint(path: Path) -> str:
    """Where the newest automatic backup of `path` is, as advice to restore it."""
    latest = latest_backup(path)
    if latest is None:
        kept = _kept_copies(Path(path))
        if kept:  # a copy kept by a restore or a demo over the book
            return f"the latest kept copy is {kept[-1]}: sumpbook restore '{kept[-1]}'"
        return f"no automatic backup was found beside it (in {path.parent})"
    return f"the latest backup is {latest}: sumpbook restore '{latest}'"


CHECK_SUFFIX = ".checked"


def check_note(path: Path) -> Path:
    """The file beside the logbook that says it passed the whole-file check as it stands
    (store/db/checknote.py)."""
    return Path(f"{path}{CHECK_SUFFIX}")


DAMAGE_SUFFIX = ".damaged"


def damage_marker(path: Path) -> Path:
    """The file beside the logbook that says a check found it damaged: which file (device and
    inode, so a new file put in its place is not taken for it) and what was found, one line.
    Every write of every process refuses the book while it is there; a restore, or a full
    check that passes (`sumpbook check`), removes it."""
    return Path(f"{path}{DAMAGE_SUFFIX}")
