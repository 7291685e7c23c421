"""One SQLite connection to a logbook file: its settings, the header check, the damage record
and plain words for a write the file refused. Below the book and its backups; both use it."""

from __future__ import annotations

import os
import re
import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from urllib.parse import quote

from store.base.errors import BookError, NotALogbook, TooNew
from store.db import checknote
from store.db.places import backup_hint, damage_marker
from store.db.schema import APPLICATION_ID, SCHEMA_VERSION

BUSY_TIMEOUT_MS = 10_000


# SQLite's primary result codes that mean "the file refused the write", not a bug in our SQL.
_WRITE_REFUSALS = {
    sqlite3.SQLITE_FULL,
    sqlite3.SQLITE_READONLY,
    sqlite3.SQLITE_BUSY,
    sqlite3.SQLITE_LOCKED,
    sqlite3.SQLITE_IOERR,
    sqlite3.SQLITE_CORRUPT,
    sqlite3.SQLITE_NOTADB,
    sqlite3.SQLITE_CANTOPEN,
    sqlite3.SQLITE_PERM,
}


def _primary_code(exc: sqlite3.Error) -> int | None:
    code = getattr(exc, "sqlite_errorcode", None)
    return None if code is None else code & 0xFF


def refused_write(exc: sqlite3.Error) -> bool:
    return _primary_code(exc) in _WRITE_REFUSALS


def write_error(exc: sqlite3.Error, path: Path) -> BookError:
    """One plain line for a write the logbook file refused; other errors keep their text."""
    code = _primary_code(exc)
    nothing = "nothing was saved"
    if code == sqlite3.SQLITE_FULL:
        return BookError(
            f"the disk holding {path} is full: {nothing}; free some space and save again"
        )
    if code in (sqlite3.SQLITE_READONLY, sqlite3.SQLITE_PERM):
        return BookError(
            f"{path} is read-only (write-protected file or medium): {nothing}; "
            "copy the logbook to a writable folder to keep logging"
        )
    if code in (sqlite3.SQLITE_BUSY, sqlite3.SQLITE_LOCKED):
        return BookError(
            f"{path} is busy: another sumpbook window or program kept it locked for "
            f"{BUSY_TIMEOUT_MS // 1000} s; {nothing}; save again in a moment"
        )
    if code in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB):
        return BookError(f"{path} is damaged: {nothing}; {backup_hint(path)}")
    if code in (sqlite3.SQLITE_IOERR, sqlite3.SQLITE_CANTOPEN):
        return BookError(f"the disk failed writing {path} ({exc}): {nothing}; check the medium")
    return BookError(f"could not write {path}: {exc}; {nothing}")


def damaged_read(exc: sqlite3.DatabaseError, path: Path) -> BookError:
    """A read that SQLite refused (a damaged page, most often), as one line of advice."""
    return NotALogbook(
        f"{path} could not be read ({exc}): it may be damaged; nothing was written to it; "
        f"{backup_hint(Path(path))}"
    )


def record_damage(path: Path, problem: str) -> None:
    """Note that a check found `path` damaged (best effort: a read-only folder keeps none),
    and drop any note that it was found sound."""
    checknote.drop(path, check_key(path))
    device, inode = file_id(path) or (0, 0)
    line = f"{device}:{inode} " + problem.replace("\n", " ")[:500]
    try:
        damage_marker(path).write_text(line + "\n", encoding="utf-8")
    except OSError:
        pass


def clear_damage(path: Path) -> None:
    try:
        damage_marker(path).unlink(missing_ok=True)
    except OSError:
        pass


def refuse_known_damage(path: Path) -> None:
    """Raise NotALogbook when a check has found this very file damaged."""
    marker = damage_marker(path)
    try:
        text = marker.read_text(encoding="utf-8").strip()
    except FileNotFoundError:
        return
    except (OSError, UnicodeDecodeError):
        text = "? see " + str(marker)
    which, _, found = text.partition(" ")
    here = "{}:{}".format(*(file_id(path) or (0, 0)))
    if which != here and which != "?":
        return  # another file stands there now (a new book, a copy put back)
    raise NotALogbook(
        f"{path} is damaged (a check found: {found}); nothing was saved; {backup_hint(Path(path))}"
    )


def file_id(path: Path) -> tuple[int, int] | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_dev, st.st_ino


@contextmanager
def no_new_side_files(path: Path) -> Iterator[None]:
    """A file refused while being looked at gets no -wal/-shm left beside it by us: those
    that did not exist before and that hold nothing (an empty -wal, a -shm) are removed."""
    sides = [Path(f"{path}-wal"), Path(f"{path}-shm")]
    before = {side for side in sides if side.exists()}
    try:
        yield
    except BookError:
        for side in sides:
            if side in before:
                continue
            try:
                if side.name.endswith("-shm") or side.stat().st_size == 0:
                    side.unlink()
            except OSError:
                pass
        raise


@contextmanager
def read_snapshot(conn: sqlite3.Connection) -> Iterator[None]:
    """Every read inside sees the book as it stood at the first one (a deferred transaction;
    inside the caller's transaction when there is one). Writers go on beside it."""
    if conn.in_transaction:
        yield
        return
    conn.execute("BEGIN")
    try:
        yield
    finally:
        if conn.in_transaction:
            conn.execute("ROLLBACK")  # nothing was written: ending it is all


def _uri(path: Path, mode: str) -> str:
    if os.name == "nt":  # drive letters; urllib.request costs ~15 ms of imports elsewhere
        from urllib.request import pathname2url

        return f"file:{pathname2url(str(path))}?mode={mode}"
    return f"file:{quote(str(path))}?mode={mode}"  # what pathname2url does on POSIX


def connect(path: Path, readonly: bool = False) -> sqlite3.Connection:
    """A connection with our settings. `readonly` falls back to an immutable open when the
    folder is write-protected too (SQLite cannot make its WAL index there)."""
    uris = (
        [_uri(path, "ro"), _uri(path, "ro") + "&immutable=1"] if readonly else [_uri(path, "rwc")]
    )
    for i, uri in enumerate(uris):
        conn = sqlite3.connect(
            uri,
            uri=True,
            isolation_level=None,
            check_same_thread=True,
            timeout=BUSY_TIMEOUT_MS / 1000,
        )
        try:
            conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
            conn.execute("PRAGMA foreign_keys = ON")
            if readonly:
                conn.execute("PRAGMA schema_version").fetchone()  # forces the file open
        except sqlite3.OperationalError as exc:
            conn.close()
            if i + 1 < len(uris) and _primary_code(exc) in (
                sqlite3.SQLITE_READONLY,
                sqlite3.SQLITE_CANTOPEN,
            ):
                continue
            raise
        return conn
    raise AssertionError("unreachable")


def writable(path: Path) -> bool:
    """Can this process write the logbook and make its side files (-wal, -shm) beside it?"""
    folder = path.parent if str(path.parent) else Path(".")
    return os.access(path, os.W_OK) and os.access(folder, os.W_OK)


def is_empty_file(path: Path) -> bool:
    return not path.exists() or path.stat().st_size == 0


# The checks also report rows that break a CHECK or NOT NULL constraint (a hand-made edit):
# those are bad values, not a damaged file; readers skip and note them. SQLite words them
# "CHECK constraint failed in T" and "NULL value in T.C" (3.40; older ones "NOT NULL
# constraint failed in T"), one line per row.
_ROW_FINDING = re.compile(
    r"^(?:(?:CHECK|NOT NULL) constraint failed in (\w+)|NULL value in (\w+)\.)"
)
EVERY_FINDING = 1_000_000  # a check's limit where every finding is wanted


def row_table(finding: str) -> str | None:
    """The table a check's finding names when it is a row breaking a CHECK or NOT NULL
    (a bad value), else None (damage)."""
    m = _ROW_FINDING.match(finding)
    return None if m is None else m.group(1) or m.group(2)


def check_verdict(conn: sqlite3.Connection, values_ok: bool = False, whole: bool = False) -> str:
    """SQLite's check of the file (`whole`: the integrity check, else the quick check): "ok"
    or its first finding. `values_ok`: rows that break a CHECK or NOT NULL count as sound (a
    bad value the readers skip and note is no damage of the file), and the first other
    finding is the answer (the check reads on past any number of such rows)."""
    check = "integrity_check" if whole else "quick_check"
    if not values_ok:
        found = conn.execute(f"PRAGMA {check}(1)" if whole else f"PRAGMA {check}").fetchone()[0]
        return found if found == "ok" else one_line(found)
    found = conn.execute(f"PRAGMA {check}({EVERY_FINDING})").fetchall()
    return one_line(next((f for (f,) in found if f != "ok" and row_table(f) is None), "ok"))


def one_line(finding: str) -> str:
    """A check's finding as one line for a message: SQLite may give one finding as many lines
    (a damaged page, cell by cell), under a heading naming the database."""
    lines = [line for line in finding.splitlines() if line and not line.startswith("*** ")]
    if len(lines) <= 1:
        return lines[0] if lines else finding.strip()
    return f"{lines[0]} (and {len(lines) - 1} more)"


def check_header(
    conn: sqlite3.Connection, path: Path, quick: bool = True, values_ok: bool = False
) -> int:
    """Return the schema version; refuse files that are not ours or are damaged.

    A database with no tables and a blank header is an empty start (a first creation that was
    interrupted): it is version 0, to be created again.
    """
    try:
        app_id = conn.execute("PRAGMA application_id").fetchone()[0]
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        blank = conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0] == 0
        ok = check_verdict(conn, values_ok) if quick else "ok"
    except sqlite3.DatabaseError as exc:
        raise NotALogbook(f"{path} is not a sumpbook logbook or is damaged ({exc})") from exc
    if app_id == 0 and version == 0 and blank and ok == "ok":
        return 0
    if app_id != APPLICATION_ID:
        raise NotALogbook(f"{path} is not a sumpbook logbook (it is some other SQLite file)")
    if ok != "ok":
        raise NotALogbook(f"{path} is damaged (quick check: {ok})")
    if version < 1 and not blank:  # tables but no version: nothing sumpbook writes
        raise NotALogbook(
            f"{path} holds tables but schema version {version}: it is not a logbook this "
            "sumpbook made, or its header was damaged"
        )
    if version > SCHEMA_VERSION:
        raise TooNew(
            f"{path} was written by a newer sumpbook (schema {version}, this one knows "
            f"{SCHEMA_VERSION}); it was left untouched: update sumpbook to open it"
        )
    return version


def check_key(path: Path) -> str:
    return str(Path(path).resolve())


# Files that passed the whole-file quick check in this process (the app's worker threads
# open the same book again and again).
CHECKED: set[str] = set()


def forget_check(path: Path) -> None:
    """The file at `path` was replaced (a restore): check it again before the next write."""
    CHECKED.discard(check_key(path))
    checknote.drop(path, check_key(path))
