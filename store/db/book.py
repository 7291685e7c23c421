"""Opening a logbook file: connection settings, header checks and migrations."""

from __future__ import annotations

import os
import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime, tzinfo
from pathlib import Path
from typing import TYPE_CHECKING
from urllib.parse import quote

from platformdirs import user_data_dir

from store.base.errors import BookError, NotALogbook, TooNew
from store.base.timeutil import parse_utc, utc_now, zone
from store.base.validate import plant_setting
from store.db.schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION

PLANT_SETTINGS = ("name", "timezone", "backup_keep")

if TYPE_CHECKING:
    import sqlite_utils

BUSY_TIMEOUT_MS = 10_000
ENV_DB = "SUMPBOOK_DB"


def default_path() -> Path:
    """Where the logbook lives unless --db or SUMPBOOK_DB say otherwise."""
    if os.environ.get(ENV_DB):
        return Path(os.environ[ENV_DB]).expanduser()
    return Path(user_data_dir("sumpbook", appauthor=False)) / "logbook.db"


@dataclass
class Book:
    """An open logbook: `conn` the SQLite connection, `path` the file.

    `readonly` is True when the file or its folder cannot be written (write-protected file,
    read-only medium): the book can be read, and every write fails with a BookError.
    """

    conn: sqlite3.Connection
    path: Path
    readonly: bool = False
    # What opening found and a person should hear once (e.g. rows an upgrade could not carry).
    notices: list[str] = field(default_factory=list)
    # Entry rows that could not be read this session: id -> what (journal.note_unreadable).
    unreadable: dict[str, str] = field(default_factory=dict)
    inode: tuple[int, int] | None = None  # (device, inode) of the file when it was opened

    @property
    def db(self) -> sqlite_utils.Database:
        """The same connection as a sqlite-utils database, for table-level work. Made on
        first use: importing sqlite-utils pulls in numpy and click (about 0.1 s), which the
        app's start and the quick commands do without."""
        import sqlite_utils

        return sqlite_utils.Database(self.conn)

    def close(self) -> None:
        self.conn.close()

    def __enter__(self) -> Book:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def atomic(self) -> Iterator[None]:
        """All writes inside land together or not at all (BEGIN IMMEDIATE takes the write lock).

        A write the file refuses (disk full, read-only, locked by another program too long,
        damaged) rolls everything back and raises a BookError saying so: nothing half-written,
        and the caller still holds what it tried to save.
        """
        conn = self.conn
        if conn.in_transaction:
            yield
            return
        self.ensure_checked()
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as exc:
            raise write_error(exc, self.path) from exc
        try:
            self._refuse_replaced()
            yield
            conn.execute("COMMIT")
        except BaseException as exc:
            if conn.in_transaction:  # SQLite may have rolled back already (e.g. disk full)
                try:
                    conn.execute("ROLLBACK")
                except sqlite3.Error:
                    pass
            if isinstance(exc, sqlite3.Error) and _translatable(exc):
                raise write_error(exc, self.path) from exc
            if isinstance(exc, sqlite3.IntegrityError):  # a CHECK or trigger of the schema
                raise BookError(f"the logbook refused a value ({exc}): nothing was saved") from exc
            if isinstance(exc, UnicodeEncodeError):  # e.g. undecodable bytes from a terminal
                raise BookError(
                    "some text holds characters that are not valid text (a wrong encoding?): "
                    "nothing was saved"
                ) from exc
            raise

    def content_stamp(self) -> tuple[object, ...]:
        """Differs from an earlier stamp once anything a screen shows may have changed: a new
        entry (voids and merges are entries too), a register edit, a setting or the shift
        pattern, by any program. Derived caches brought up to date leave it as it was."""
        return self.conn.execute(
            "SELECT (SELECT max(rowid) FROM entries), (SELECT max(rowid) FROM register_log), "
            "(SELECT group_concat(key || '=' || value, ';') FROM settings), "
            "(SELECT group_concat(name || '@' || starts, ';') FROM shifts)"
        ).fetchone()

    def ensure_checked(self) -> None:
        """Before a write: refuse a book known to be damaged (a check of any process found
        damage: `damage_marker`), and run the whole-file quick check once per process before
        the first write (see `deep_check`); damage raises NotALogbook, nothing is written."""
        if self.readonly:
            return
        refuse_known_damage(self.path)
        if _key(self.path) not in _CHECKED:
            _quick_check(self.conn, self.path)

    def _refuse_replaced(self) -> None:
        """Under the write lock: the file at `path` is still the one this connection opened (a
        restore of a damaged book puts a new file in its place; a write to the old one would
        be lost)."""
        if self.inode is not None and _file_id(self.path) != self.inode:
            raise BookError(
                f"{self.path} was replaced (restored) since it was opened: nothing was saved; "
                "open it again and save once more"
            )

    def now(self) -> datetime:
        """UTC now; a demo book is frozen at the moment its story ends (setting 'clock')."""
        frozen = self.setting("clock")
        return parse_utc(frozen) if frozen else utc_now()

    def local_zone(self) -> tzinfo:
        return zone(self.setting("timezone"))

    def shift_pattern(self) -> list[tuple[str, str]]:
        rows = self.conn.execute("SELECT name, starts FROM shifts ORDER BY starts").fetchall()
        return [(name, starts) for name, starts in rows]

    def setting(self, key: str, default: str | None = None) -> str | None:
        row = self.conn.execute("SELECT value FROM settings WHERE key = ?", [key]).fetchone()
        return row[0] if row else default

    def set_setting(self, key: str, value: str) -> None:
        if key in PLANT_SETTINGS:
            value = plant_setting(key, value)  # the same check for every door
        with self.atomic():
            self.conn.execute(
                "INSERT INTO settings(key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                [key, value],
            )


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


def _translatable(exc: sqlite3.Error) -> bool:
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


def backup_hint(path: Path) -> str:
    """Where the newest automatic backup of `path` is, as advice to restore it."""
    from store.db.backup import latest_backup

    latest = latest_backup(path)
    if latest is None:
        return f"no automatic backup was found beside it (in {path.parent})"
    return f"the latest backup is {latest}: sumpbook restore '{latest}'"


# ---- damage found by a check ---------------------------------------------------------------------

DAMAGE_SUFFIX = ".damaged"


def damage_marker(path: Path) -> Path:
    """The file beside the logbook that says a check found it damaged: which file (device and
    inode, so a new file put in its place is not taken for it) and what was found, one line.
    Every write of every process refuses the book while it is there; a restore, or a full
    check that passes (`sumpbook check`), removes it."""
    return Path(f"{path}{DAMAGE_SUFFIX}")


def record_damage(path: Path, problem: str) -> None:
    """Note that a check found `path` damaged (best effort: a read-only folder keeps none)."""
    device, inode = _file_id(path) or (0, 0)
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
    here = "{}:{}".format(*(_file_id(path) or (0, 0)))
    if which != here and which != "?":
        return  # another file stands there now (a new book, a copy put back)
    raise NotALogbook(
        f"{path} is damaged (a check found: {found}); nothing was saved; {backup_hint(Path(path))}"
    )


def full_check(path: Path) -> None:
    """SQLite's integrity check of the whole file (every page, and every index against its
    table: what the quick check leaves out), on a read-only connection of its own. Damage is
    recorded beside the book (`damage_marker`: writes then refuse it) and raises
    NotALogbook naming the latest backup; a pass removes an earlier record."""
    path = Path(path)
    if not path.is_file():
        raise BookError(f"no logbook at {path}")
    with _no_new_side_files(path):
        inspect(path)
        conn = _checking_connection(path, readonly=True)
        try:
            try:
                rows = conn.execute("PRAGMA integrity_check(5)").fetchall()
                found = "; ".join(str(r[0]) for r in rows)
            except sqlite3.DatabaseError as exc:
                found = str(exc)
        finally:
            conn.close()
        if found != "ok":
            record_damage(path, f"integrity check: {found}")
            raise NotALogbook(
                f"{path} is damaged (integrity check: {found}); nothing was written to it; "
                f"{backup_hint(path)}"
            )
    clear_damage(path)
    _CHECKED.add(_key(path))


def _file_id(path: Path) -> tuple[int, int] | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_dev, st.st_ino


@contextmanager
def _no_new_side_files(path: Path) -> Iterator[None]:
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


def _uri(path: Path, mode: str) -> str:
    if os.name == "nt":  # drive letters; urllib.request costs ~15 ms of imports elsewhere
        from urllib.request import pathname2url

        return f"file:{pathname2url(str(path))}?mode={mode}"
    return f"file:{quote(str(path))}?mode={mode}"  # what pathname2url does on POSIX


def _connect(path: Path, readonly: bool = False) -> sqlite3.Connection:
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


def _is_empty_file(path: Path) -> bool:
    return not path.exists() or path.stat().st_size == 0


def check_header(conn: sqlite3.Connection, path: Path, quick: bool = True) -> int:
    """Return the schema version; refuse files that are not ours or are damaged.

    A database with no tables and a blank header is an empty start (a first creation that was
    interrupted): it is version 0, to be created again.
    """
    try:
        app_id = conn.execute("PRAGMA application_id").fetchone()[0]
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        blank = conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0] == 0
        ok = conn.execute("PRAGMA quick_check").fetchone()[0] if quick else "ok"
    except sqlite3.DatabaseError as exc:
        raise NotALogbook(f"{path} is not a sumpbook logbook or is damaged ({exc})") from exc
    if app_id == 0 and version == 0 and blank and ok == "ok":
        return 0
    if app_id != APPLICATION_ID:
        raise NotALogbook(f"{path} is not a sumpbook logbook (it is some other SQLite file)")
    if ok != "ok":
        raise NotALogbook(f"{path} is damaged (quick check: {ok})")
    if version > SCHEMA_VERSION:
        raise TooNew(
            f"{path} was written by a newer sumpbook (schema {version}, this one knows "
            f"{SCHEMA_VERSION}); it was left untouched: update sumpbook to open it"
        )
    return version


def migrate(conn: sqlite3.Connection, from_version: int) -> list[str]:
    """Apply every pending step in one transaction, with the version bump inside it.

    Foreign keys are off while the steps run (a step may rebuild a table, SQLite's recipe for
    new constraints) and checked whole before the commit. Returns what the steps found: rows
    they could not carry over, kept in the `quarantine` table."""
    pending = MIGRATIONS[from_version:]
    if not pending:
        return []
    before = _quarantined(conn)
    script = "\n".join(pending)
    conn.execute("PRAGMA foreign_keys = OFF")
    try:
        conn.executescript(
            "BEGIN IMMEDIATE;\n"
            f"{script}\n"
            f"PRAGMA application_id = {APPLICATION_ID};\n"
            f"PRAGMA user_version = {SCHEMA_VERSION};\n"
        )
        dangling = conn.execute("PRAGMA foreign_key_check").fetchall()
        if dangling:
            conn.execute("ROLLBACK")
            table, rowid, parent, _ = dangling[0]
            raise BookError(
                f"the upgrade found {len(dangling)} rows pointing at nothing (first: {table} row "
                f"{rowid} -> {parent}); the file was left as it was"
            )
        found = _quarantined(conn) - before
        conn.execute("COMMIT")
    except BaseException:
        if conn.in_transaction:
            conn.execute("ROLLBACK")
        raise
    finally:
        conn.execute("PRAGMA foreign_keys = ON")
    if not found:
        return []
    return [
        f"the upgrade to schema {SCHEMA_VERSION} could not carry {found} "
        f"{'row' if found == 1 else 'rows'} over (values the book now refuses); they are kept "
        "whole in the table 'quarantine' of the logbook, and nothing else changed"
    ]


def _quarantined(conn: sqlite3.Connection) -> int:
    try:
        return conn.execute("SELECT count(*) FROM quarantine").fetchone()[0]
    except sqlite3.OperationalError:  # before schema 4
        return 0


def open_book(
    path: Path | str | None = None, *, create: bool = True, readonly: bool = False
) -> Book:
    """Open (and if needed create or migrate) the logbook at `path`.

    An existing file is checked before anything is written to it (`inspect`); a file that is
    write-protected or on read-only media opens read-only (`Book.readonly`), and so does any
    file with `readonly` (a forked child process reads with it: it must never write).
    """
    path = Path(path) if path is not None else default_path()
    notices: list[str] = []
    new = _is_empty_file(path)
    if new and (readonly or not create):
        raise BookError(f"no logbook at {path}: run 'sumpbook demo' or register a unit first")
    if new:
        path.parent.mkdir(parents=True, exist_ok=True)
        clear_damage(path)  # a record of a file that stood here before (inodes are reused)
    readonly = readonly or (not new and not writable(path))
    with _no_new_side_files(path):
        version = 0 if new else inspect(path, readonly)
    if 0 < version < SCHEMA_VERSION:
        deep_check(path)  # before an upgrade writes to it
    try:
        conn = _connect(path, readonly=readonly)
    except sqlite3.Error as exc:
        raise BookError(f"cannot open {path}: {exc}") from exc
    try:
        if not new:
            version = check_header(conn, path, quick=False)
        if version < SCHEMA_VERSION and readonly:
            raise BookError(
                f"{path} is read-only and was written by an older sumpbook: copy it to a "
                "writable folder so it can be upgraded"
            )
        if version == 0:
            # WAL before the first write: a creation cut short leaves a blank file, not a
            # half-made one behind a rollback journal.
            conn.execute("PRAGMA journal_mode = WAL")
        if version < SCHEMA_VERSION:
            if version > 0:
                from store.db.backup import backup_before_migration

                backup_before_migration(conn, path, version)
            try:
                notices = migrate(conn, version)
            except sqlite3.Error as exc:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise BookError(f"could not upgrade {path}: {exc}; it was left as it was") from exc
            if version == 0:
                # schema 4 rebuilds schema 1's tables: a new file gives back their pages
                conn.execute("VACUUM")
        if not readonly:
            conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA synchronous = FULL")
    except BaseException:
        conn.close()
        raise
    if new:
        _CHECKED.add(_key(path))  # made here and now: nothing to check
    return Book(conn=conn, path=path, readonly=readonly, notices=notices, inode=_file_id(path))


def inspect(path: Path, readonly: bool = True) -> int:
    """Check an existing file before anything is written to it: application id in the
    header, that SQLite can read its schema, schema version. Returns the version;
    NotALogbook names the latest backup.

    The whole-file check is not made here (it reads every page: seconds on a book of
    millions of entries): reading needs none (SQLite refuses a damaged page it meets, and
    the command says so), and the first write of a process runs it (`Book.ensure_checked`).

    The check runs on a read-only connection, so a refused file is left as it was; only a
    file with a hot rollback journal (a write cut short in rollback mode) gets a writing
    connection, because SQLite must roll that write back before anyone can read the file.
    """
    hot = Path(f"{path}-journal")
    writer = not readonly and hot.exists() and hot.stat().st_size > 0
    conn = _checking_connection(path, readonly=not writer)
    try:
        return check_header(conn, path, quick=False)
    except NotALogbook as exc:
        raise NotALogbook(f"{exc}; it was left untouched; {backup_hint(path)}") from exc
    finally:
        conn.close()


def deep_check(path: Path) -> None:
    """SQLite's quick check of every page of the file, on a read-only connection of its own
    (the app runs it in the background after the first paint). Once a file has passed, the
    process does not check it again; damage is recorded beside the book (every process then
    refuses to write to it) and raises NotALogbook naming the latest backup.

    Not the full integrity check (`full_check`, `sumpbook check`): that one also compares
    every index with its table and took 10x as long on the 1.4 GB benchmark book (114 s
    against 11 s on a busy 2-core machine), too long to run behind every start."""
    if _key(path) in _CHECKED:
        return
    conn = _checking_connection(path, readonly=True)
    try:
        _quick_check(conn, path)
    finally:
        conn.close()


def forget_check(path: Path) -> None:
    """The file at `path` was replaced (a restore): check it again before the next write."""
    _CHECKED.discard(_key(path))


def _checking_connection(path: Path, readonly: bool) -> sqlite3.Connection:
    try:
        return _connect(path, readonly=readonly)
    except sqlite3.Error as exc:
        raise NotALogbook(
            f"{path} is not a sumpbook logbook or is damaged ({exc}); it was left untouched; "
            f"{backup_hint(path)}"
        ) from exc


# quick_check also reports rows that break a CHECK or NOT NULL constraint (a hand-made edit):
# those are bad values, not a damaged file; readers skip them and they can be voided.
_ROW_FINDINGS = ("CHECK constraint failed", "NOT NULL constraint failed")


def _quick_check(conn: sqlite3.Connection, path: Path) -> None:
    try:
        found = [row[0] for row in conn.execute("PRAGMA quick_check").fetchall()]
        ok = "ok" if all(f == "ok" or f.startswith(_ROW_FINDINGS) for f in found) else found[0]
    except sqlite3.DatabaseError as exc:
        ok = str(exc)
    if ok != "ok":
        record_damage(path, f"quick check: {ok}")
        raise NotALogbook(
            f"{path} is damaged (quick check: {ok}); nothing was written to it; {backup_hint(path)}"
        )
    _CHECKED.add(_key(path))


def _key(path: Path) -> str:
    return str(Path(path).resolve())


# Files that passed the whole-file quick check in this process (the app's worker threads
# open the same book again and again).
_CHECKED: set[str] = set()
