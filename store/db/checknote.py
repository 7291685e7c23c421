"""The note beside a logbook that says the file, exactly as it stands, passed the whole-file
quick check: so that the next process's first write does not read every page again.

A process checks a book once before its first write (`Book.ensure_checked`): seconds on a
big plant, paid by every `sumpbook log` before this note. The note holds what the file
looked like to the operating system as the check found it (taken before the check began, so
that a write during it makes the note not hold), or after a later save of a process that had
checked it (or met a note that held): device, inode, size, change and modification times of
the book and of its `-wal`. A process whose first write finds the file looking
exactly so takes the note's word; any other look (another program wrote to it, copied over
it, damaged it, put it back with its old modification time) and it checks again.

The chain is only carried on by a save that found the file as the last vouched look left it
(`Book.atomic`): a file changed between two saves by someone else gets no note until it is
checked again. A note is good for `NOTE_GOOD_FOR` after the check it carries, whatever the
saves since, so a book written only from the command line is still read through once a day.
Best effort: a folder that cannot be written keeps no note, and every process checks.
"""

from __future__ import annotations

import os
import threading
from datetime import UTC, datetime, timedelta
from pathlib import Path

from store.db.places import check_note

NOTE_GOOD_FOR = timedelta(hours=24)  # common practice, no source: at least a check a day

_lock = threading.Lock()
# What this process last vouched for, by file (`check_key`): (the look, when it was checked).
_VOUCHED: dict[str, tuple[str, str]] = {}


def look(path: Path) -> str:
    """The file and its -wal as the operating system shows them: equal looks, no write
    between them (by anyone, through SQLite or not). An empty -wal holds nothing: it looks as
    none does (every connection that opens the book makes one)."""
    parts = []
    for name in (str(path), f"{path}-wal"):
        try:
            st = os.stat(name)
        except FileNotFoundError:
            parts.append("-")
            continue
        except OSError:  # cannot be looked at: matches no note (never a failed save)
            parts.append("?")
            continue
        if st.st_size == 0 and name != str(path):
            parts.append("-")
            continue
        parts.append(f"{st.st_dev}:{st.st_ino}:{st.st_size}:{st.st_mtime_ns}:{st.st_ctime_ns}")
    return " ".join(parts)


def _read(path: Path) -> tuple[str, str] | None:
    """The note's (look, checked_at), or None for none or one that cannot be read."""
    try:
        text = check_note(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return None
    fields = text.strip().split("\n")
    if len(fields) != 2:
        return None
    return fields[0], fields[1]


def _fresh(checked_at: str, now: datetime) -> bool:
    try:
        then = datetime.fromisoformat(checked_at)
    except ValueError:
        return False
    return then.tzinfo is not None and timedelta(0) <= now - then <= NOTE_GOOD_FOR


def holds(path: Path, key: str, now: datetime | None = None) -> bool:
    """Whether the note beside `path` vouches for the file as it looks now (and is not
    older than NOTE_GOOD_FOR); if so, this process vouches for it too."""
    found = _read(path)
    if found is None:
        return False
    seen, checked_at = found
    if "?" in seen or seen != look(path) or not _fresh(checked_at, now or datetime.now(UTC)):
        return False
    with _lock:
        _VOUCHED[key] = (seen, checked_at)
    return True


def checked(path: Path, key: str, seen: str, now: datetime | None = None) -> None:
    """The whole-file check passed on the file as it looked (`seen`, taken before the
    check began): note it."""
    stamp = (now or datetime.now(UTC)).isoformat(timespec="seconds")
    with _lock:
        _VOUCHED[key] = (seen, stamp)
    _write(path, seen, stamp)


def unchanged(path: Path, key: str) -> bool:
    """Before a save (under the write lock): the file looks as this process last vouched
    for it, or as a note of another process that checked it says."""
    now_look = look(path)
    if "?" in now_look:
        return False
    with _lock:
        mine = _VOUCHED.get(key)
    if mine is not None and mine[0] == now_look:
        return True
    found = _read(path)
    if found is not None and found[0] == now_look:
        with _lock:
            _VOUCHED[key] = found
        return True
    return False


def saved(path: Path, key: str) -> None:
    """After a save that found the file unchanged: the note follows the file's new look, with
    the time of the check it still carries."""
    with _lock:
        mine = _VOUCHED.get(key)
        if mine is None:
            return
        seen = look(path)
        _VOUCHED[key] = (seen, mine[1])
    _write(path, seen, mine[1])


def forget(key: str) -> None:
    """This process vouches for the file no more (it changed under a save by someone else)."""
    with _lock:
        _VOUCHED.pop(key, None)


def drop(path: Path, key: str) -> None:
    """No note, nothing vouched for (a restore put another file there, or a check found
    damage)."""
    forget(key)
    try:
        check_note(path).unlink(missing_ok=True)
    except OSError:
        pass


def _write(path: Path, seen: str, checked_at: str) -> None:
    note = check_note(path)
    part = note.with_name(f"{note.name}.{os.getpid()}.{threading.get_ident()}")
    try:
        part.write_text(f"{seen}\n{checked_at}\n", encoding="utf-8")
        os.replace(part, note)
    except OSError:
        try:
            part.unlink(missing_ok=True)
        except OSError:
            pass
