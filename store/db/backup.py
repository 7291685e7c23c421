"""Backups through SQLite's online backup API: rolling copies beside the logbook, one-off
copies (`sumpbook backup DEST`) and restoring a copy (`sumpbook restore FILE`).

Rolling copies live in `<name>-backups/` beside the logbook, named
`<name>-<UTC stamp>-<why>.db`; the newest `keep` are kept (setting `backup_keep`, else
DEFAULT_KEEP). A copy identical to the newest one is not kept twice, so closing the app
without having logged anything does not push older copies out.
"""

from __future__ import annotations

import filecmp
import os
import re
import shutil
import sqlite3
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from urllib.parse import quote

from store.base.errors import BookError, NotALogbook
from store.db.connection import (
    BUSY_TIMEOUT_MS,
    check_header,
    check_verdict,
    clear_damage,
    connect,
    forget_check,
    writable,
    write_error,
)
from store.db.places import backup_dir, latest_backup, rolling_backups
from store.db.proof import (
    carried_rows,
    carry_bad_rows,
    header_findings,
    prove_file,
    read_only,
)
from store.db.targets import refuse_input_as_output

DEFAULT_KEEP = 10
KEEP_SETTING = "backup_keep"
KEPT_BEFORE_RESTORE = "before-restore"


def _stamp() -> str:
    return datetime.now(UTC).strftime("%Y%m%dT%H%M%S%fZ")


def keep_count(conn: sqlite3.Connection) -> int:
    """How many rolling copies to keep: the book's setting `backup_keep`, else DEFAULT_KEEP."""
    try:
        row = conn.execute("SELECT value FROM settings WHERE key = ?", [KEEP_SETTING]).fetchone()
    except sqlite3.Error:
        return DEFAULT_KEEP
    try:
        return max(1, int(row[0])) if row else DEFAULT_KEEP
    except (TypeError, ValueError):
        return DEFAULT_KEEP


def copy_to(conn: sqlite3.Connection, dest: Path) -> Path:
    """Write a consistent copy of the open logbook to `dest` (a new file, or a new dated file
    inside `dest` when it is a folder); never over an existing file. The copy is checked:
    rows that break a CHECK or NOT NULL (values stored outside sumpbook) pass where the book
    holds the very same ones, and the copy names them for a restore (`carry_bad_rows`);
    anything else found refuses it."""
    dest = Path(dest)
    if dest.is_dir():
        dest = dest / f"logbook-{_stamp()}.db"
    if dest.exists():
        raise BookError(f"{dest} exists already: choose a new file name")
    tmp = dest.with_name(dest.name + ".part")
    try:
        dest.parent.mkdir(parents=True, exist_ok=True)
        tmp.unlink(missing_ok=True)
        target = sqlite3.connect(tmp)
        try:
            conn.backup(target)
            target.execute("PRAGMA journal_mode = DELETE")
            ok = carry_bad_rows(target, conn)
        finally:
            target.close()
        if ok != "ok":
            raise BookError(f"the copy for {dest} did not check out ({ok}); nothing was kept")
        tmp.replace(dest)
    except (OSError, sqlite3.Error) as exc:
        tmp.unlink(missing_ok=True)
        raise BookError(f"could not write the backup {dest}: {exc}") from exc
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return dest


def copy_holding_lock(conn: sqlite3.Connection, book_path: Path, dest: Path) -> Path:
    """`copy_to` while another connection holds the book's write lock: a save under way is
    waited for (busy timeout), saves meanwhile wait for the copy, and the copy holds every
    save reported before it. A book this process cannot write is copied as it stands.
    `dest` may not be the book, its companion files or backups, or any SQLite file
    (`store.db.targets`)."""
    if not Path(dest).is_dir():
        refuse_input_as_output(Path(dest), Path(book_path), "the backup")
    if not writable(Path(book_path)):
        return copy_to(conn, dest)
    lock = connect(Path(book_path))
    try:
        try:
            lock.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as exc:
            raise write_error(exc, Path(book_path)) from exc
        try:
            return copy_to(conn, dest)
        finally:
            lock.execute("ROLLBACK")
    finally:
        lock.close()


def carried_in(copy: Path) -> dict[str, list[str]]:
    """The rows breaking the book's checks that a copy carries as the book held them (named
    in it by `carry_bad_rows`), by table; empty for none."""
    conn = read_only(copy)
    try:
        return carried_rows(conn) or {}
    finally:
        conn.close()


def rolling_backup(
    conn: sqlite3.Connection, book_path: Path, why: str, keep: int | None = None
) -> Path:
    """Add a dated copy beside the logbook and drop the oldest beyond `keep` (None: the
    book's setting `backup_keep`, else DEFAULT_KEEP). Returns the newest copy."""
    if not re.fullmatch(r"[\w.-]{1,40}", why):
        raise ValueError(f"backup reason '{why}' must be a short word")
    keep = keep_count(conn) if keep is None else max(1, keep)
    book_path = Path(book_path)
    previous = latest_backup(book_path)
    dest = copy_to(conn, backup_dir(book_path) / f"{book_path.stem}-{_stamp()}-{why}.db")
    if previous is not None and _same_bytes(previous, dest):
        dest.unlink(missing_ok=True)
        dest = previous
    copies = rolling_backups(book_path)
    for old in copies[: max(0, len(copies) - keep)]:
        old.unlink(missing_ok=True)
    return dest


def _same_bytes(a: Path, b: Path) -> bool:
    try:
        return filecmp.cmp(a, b, shallow=False)
    except OSError:
        return False


# ---- restore -------------------------------------------------------------------------------------


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and a.samefile(b)
    except OSError:
        return False


def _healthy(book_path: Path) -> bool:
    """Whether the live book is a logbook (application id, not too new) and not damaged
    (integrity check). Rows that break a CHECK or NOT NULL (values stored outside sumpbook,
    which readers skip and note) are no damage: its kept copy carries them (`copy_to`)."""
    path = Path(book_path)
    if not path.is_file() or path.stat().st_size == 0:
        return False
    try:
        conn = connect(path, readonly=True)
    except sqlite3.Error:
        return False
    try:
        check_header(conn, path, values_ok=True)
        return check_verdict(conn, values_ok=True, whole=True) == "ok"
    except (BookError, sqlite3.DatabaseError):
        return False
    finally:
        conn.close()


def side_copy(file: Path, book_path: Path, label: str | None = None) -> Path:
    """Copy `file` to a side file beside the logbook through SQLite's backup API (pages
    only: nothing of the file is run), in rollback-journal mode. The side file is what gets
    proven and swapped in, so a file changed after its check cannot slip in."""
    file, book_path = Path(file), Path(book_path)
    label = label or str(file)
    side = book_path.with_name(book_path.name + ".incoming")
    remove_side_file(side)
    found = header_findings(file)
    if found:
        raise NotALogbook(f"{label} is not a sound logbook: {found[0]}")
    try:
        source = read_only(file)
        try:
            target = sqlite3.connect(side, isolation_level=None)
            try:
                source.backup(target)
                target.execute("PRAGMA journal_mode = DELETE")
            finally:
                target.close()
        finally:
            source.close()
    except sqlite3.Error as exc:
        remove_side_file(side)
        raise NotALogbook(f"{label} cannot be read as a logbook ({exc})") from exc
    except OSError as exc:
        remove_side_file(side)
        raise BookError(f"could not copy {label} beside {book_path}: {exc}") from exc
    except BaseException:
        remove_side_file(side)
        raise
    return side


def remove_side_file(side: Path) -> None:
    for suffix in ("", "-wal", "-shm", "-journal"):
        try:
            Path(f"{side}{suffix}").unlink(missing_ok=True)
        except OSError:
            pass


def restore(file: Path, book_path: Path) -> Path | None:
    """Replace the logbook at `book_path` by the file `file`, proven good first.

    `file` is copied to a side file beside the book and that copy is proven
    (`store.db.proof.prove_file`: header, application id, a known schema version, the whole
    integrity check with every CHECK, the schema objects exactly as sumpbook makes them).
    Only then is the current logbook (if any) kept as
    `<name>-backups/<name>-before-restore-…db` (rolling backups never delete it; the restore
    is refused when it cannot be kept) and the proven copy swapped in (`swap_in`). Any
    refusal leaves the logbook as it was. Returns the kept copy (None when there was no
    logbook).
    """
    file, book_path = Path(file), Path(book_path)
    if _same_file(file, book_path):
        raise BookError(f"{file} is the logbook itself: choose a backup copy to restore")
    untouched = f"; {book_path} was left as it was"
    try:
        side = side_copy(file, book_path)
    except BookError as exc:
        raise type(exc)(f"{exc}{untouched}") from exc
    try:
        try:
            prove_file(side, str(file), carried=True)
        except BookError as exc:
            raise type(exc)(f"{exc}{untouched}") from exc
        # a copy that carries its book's bad values (proven to be only those) goes in with
        # them: the restored book's checks let them through, as the book's own did
        kept = swap_in(side, book_path, KEPT_BEFORE_RESTORE, values_ok=_carries(side))
    finally:
        remove_side_file(side)
    return kept


class BookChanged(BookError):
    """The book changed since the side file was made from it (`swap_in`'s `unchanged`):
    nothing was swapped in."""


def swap_in(
    side: Path,
    book_path: Path,
    why: str,
    unchanged: Callable[[Path], bool] | None = None,
    values_ok: bool = False,
) -> Path | None:
    """Put the proven file `side` in the place of the logbook at `book_path`.

    The current logbook is first kept as `<name>-backups/<name>-<why>-<stamp>.db` (refused
    with the book untouched when it cannot be). A healthy logbook, in WAL or
    rollback-journal mode alike, is overwritten through the backup API, one transaction
    that holds the book's write lock from before the kept copy is read to its commit: a
    save by another program either committed before (it is in the kept copy), or waits for
    the lock (busy timeout) and lands in the restored book, or gives up and says nothing
    was saved. (Keeping under one lock and overwriting under a second one, as a guess at
    the journal mode once chose, lets a save in between: it is then in neither file.) A
    damaged one is kept byte for byte and the side file renamed over it (a program that
    still has the old file open refuses to write to it, see `Book.atomic`). Returns the
    kept copy, or None when there was no logbook.

    `unchanged(kept)`, when given, is asked under the lock once the kept copy is made: False
    (the book is not what the side file was made from) ends the swap with nothing written
    (BookChanged). A damaged book is then refused too.

    Rows of the book that break a CHECK or NOT NULL (values stored outside sumpbook) are no
    damage: the book is overwritten as a healthy one, and its kept copy carries them, named
    (`copy_to`). `values_ok` (a side file proven to carry such rows: an upgrade's, a restored
    copy that names them): the book as overwritten may hold them too.
    """
    side, book_path = Path(side), Path(book_path)
    kept = None
    if book_path.exists() and book_path.stat().st_size > 0:
        kept = backup_dir(book_path) / f"{book_path.stem}-{why}-{_stamp()}.db"
        if _healthy(book_path):
            source = read_only(side)  # proven: its pages are copied, nothing run
            try:
                _overwrite(source, book_path, kept, unchanged, values_ok)
            finally:
                source.close()
        elif unchanged is not None:
            raise BookError(f"{book_path} did not check out: nothing was swapped in")
        else:
            _keep_raw(book_path, kept)
            _rename_over(side, book_path)
    else:
        _rename_over(side, book_path)
    forget_check(book_path)  # another file now: the next write checks it again
    clear_damage(book_path)
    return kept


RESTORE_STEP_PAGES = 1  # the first step must not finish the copy: the kept copy comes after it


def _overwrite(
    source: sqlite3.Connection,
    book_path: Path,
    kept: Path,
    unchanged: Callable[[Path], bool] | None = None,
    values_ok: bool = False,
) -> None:
    """Keep the live logbook as `kept`, then copy `source` into it, as one write transaction
    that holds the book's write lock from before the kept copy is read to the end.

    After the first step the target connection holds the lock. In WAL mode readers go on
    beside it, and the kept copy is read through SQLite. In rollback-journal mode that lock
    is EXCLUSIVE (the backup API asks for it): no reader gets in, but no one can change the
    file either, and its bytes on disk are the committed book (the one page copied so far
    sits in the target's cache, its original in the journal), so the kept copy is those
    bytes, read through a plain descriptor (closing a descriptor of the file drops every
    POSIX lock this process holds on it, so it is closed only after the target; no other
    connection of this process has the book open during a restore or a demo)."""
    target = sqlite3.connect(book_path, timeout=BUSY_TIMEOUT_MS / 1000)
    problems: list[BaseException] = []
    raw: list[int] = []  # descriptors of the book opened here, closed after the target

    def keep_current(status: int, remaining: int, total: int) -> None:
        # Called after each step; after the first, this connection holds the write lock (the
        # copy so far is not committed: readers see the book as it stands, writers wait).
        if problems or kept.exists():
            return
        if status in (sqlite3.SQLITE_BUSY, sqlite3.SQLITE_LOCKED):  # no lock after the timeout
            problems.append(
                BookError(
                    f"{book_path} is busy: another sumpbook window or program kept it locked "
                    f"for {BUSY_TIMEOUT_MS // 1000} s; nothing was swapped in; try again in a "
                    "moment"
                )
            )
            raise problems[-1]
        if remaining == 0:  # the copy is already whole: too late to keep what was there
            problems.append(BookError("could not keep the current logbook first"))
            raise problems[-1]
        try:
            if _held_exclusively(book_path):
                raw.append(os.open(book_path, os.O_RDONLY | getattr(os, "O_BINARY", 0)))
                _keep_bytes(raw[0], kept)
            else:
                current = connect(book_path, readonly=True)
                try:
                    copy_to(current, kept)
                finally:
                    current.close()
            if unchanged is not None and not unchanged(kept):
                kept.unlink(missing_ok=True)  # a copy of nothing that is being replaced
                raise BookChanged(f"{book_path} changed meanwhile: nothing was swapped in")
        except BaseException as exc:
            problems.append(exc)
            raise

    try:
        source.backup(target, pages=RESTORE_STEP_PAGES, progress=keep_current)
        ok = check_verdict(target, values_ok)
    except sqlite3.Error as exc:
        if problems:  # the kept copy failed: the backup was ended, nothing was committed
            raise problems[0] from exc
        raise write_error(exc, book_path) from exc
    except BaseException:
        if problems:
            raise problems[0] from None
        raise
    finally:
        target.close()
        for fd in raw:
            os.close(fd)
    if problems:
        raise problems[0]
    if ok != "ok":
        raise BookError(f"{book_path} did not check out after the restore ({ok})")


def _carries(side: Path) -> bool:
    """Whether a proven file names bad values it carries (`carry_bad_rows`)."""
    conn = read_only(side)
    try:
        return carried_rows(conn) is not None
    finally:
        conn.close()


def _held_exclusively(book_path: Path) -> bool:
    """Rollback-journal mode with our target holding the EXCLUSIVE lock: its journal stands
    beside the book and a reader is refused at once. (In WAL mode a reader always gets in.)"""
    if not Path(f"{book_path}-journal").exists():
        return False
    probe = sqlite3.connect(f"file:{quote(str(book_path))}?mode=ro", uri=True, timeout=0)
    try:
        probe.execute("SELECT count(*) FROM sqlite_master").fetchone()
    except sqlite3.OperationalError as exc:
        return "locked" in str(exc)
    finally:
        probe.close()
    return False


def _keep_bytes(raw: int, kept: Path) -> None:
    """Copy the book's bytes from the open descriptor `raw` to `kept` (a new file), checked
    as `copy_to` checks a copy (its bad values, the book's own, named in it)."""
    tmp = kept.with_name(kept.name + ".part")
    try:
        kept.parent.mkdir(parents=True, exist_ok=True)
        with open(tmp, "wb") as out:
            offset = 0
            while chunk := os.pread(raw, 1 << 20, offset):
                out.write(chunk)
                offset += len(chunk)
            out.flush()
            os.fsync(out.fileno())
        check = sqlite3.connect(tmp)
        try:
            ok = carry_bad_rows(check, None)
        finally:
            check.close()
        if ok != "ok":
            raise BookError(f"the copy {kept} did not check out ({ok}); nothing was kept")
        tmp.replace(kept)
    except (OSError, sqlite3.Error) as exc:
        tmp.unlink(missing_ok=True)
        raise BookError(f"could not keep the current logbook as {kept}: {exc}") from exc
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def _keep_raw(book_path: Path, kept: Path) -> None:
    """Keep a damaged logbook as it is, with its write-ahead log if it has one."""
    try:
        kept.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(book_path, kept)
        wal = Path(f"{book_path}-wal")
        if wal.exists():
            shutil.copy2(wal, Path(f"{kept}-wal"))
    except OSError as exc:
        raise BookError(f"could not keep the current logbook as {kept}: {exc}") from exc


def _rename_over(side: Path, book_path: Path) -> None:
    """Move the proven side file over `book_path` in one rename (no one may have it open)."""
    try:
        for suffix in ("-wal", "-shm", "-journal"):
            Path(f"{book_path}{suffix}").unlink(missing_ok=True)
        book_path.parent.mkdir(parents=True, exist_ok=True)
        side.replace(book_path)
    except OSError as exc:
        raise BookError(f"could not write {book_path}: {exc}") from exc
