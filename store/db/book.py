"""Opening a logbook file: connection settings, header checks and migrations."""

from __future__ import annotations

import os
import sqlite3
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime, tzinfo
from pathlib import Path
from typing import TYPE_CHECKING, Any

from store.base.errors import BookError, NotALogbook
from store.base.timeutil import parse_utc, utc_now, zone
from store.base.validate import plant_setting, voidable
from store.db import checknote
from store.db.connection import (
    CHECKED,
    check_header,
    check_key,
    check_verdict,
    clear_damage,
    connect,
    file_id,
    is_empty_file,
    no_new_side_files,
    record_damage,
    refuse_known_damage,
    refused_write,
    row_table,
    writable,
    write_error,
)
from store.db.places import backup_dir, backup_hint
from store.db.schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION

PLANT_SETTINGS = ("name", "timezone", "backup_keep")

if TYPE_CHECKING:
    import sqlite_utils


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
    clock: Callable[[], datetime] = utc_now  # this run's clock (store.base.session)
    # What the derived layers keep between calls on this connection, each under its own name
    # with the stamp it was read at; its owner checks the stamp before every use
    # (store.derived.statuscache.register: the register rows the keys are made of).
    kept: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)
    _db: sqlite_utils.Database | None = field(default=None, repr=False, compare=False)

    @property
    def db(self) -> sqlite_utils.Database:
        """The same connection as a sqlite-utils database, for table-level work. Made once,
        on first use: importing sqlite-utils pulls in numpy and click (about 0.1 s), which the
        app's start and the quick commands do without. Recursive triggers stay off (the
        library turns them on by default; the book's triggers are written without them)."""
        if self._db is None:
            import sqlite_utils  # deferred: see above

            self._db = sqlite_utils.Database(self.conn, recursive_triggers=False)
        return self._db

    def close(self) -> None:
        """Close the connection. SQLite's last connection to a file folds the -wal into it
        as it closes: the check note follows the file when this process vouched for it."""
        key = check_key(self.path)
        vouch = not self.readonly and key in CHECKED and checknote.unchanged(self.path, key)
        self.conn.close()
        if vouch:
            checknote.saved(self.path, key)

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
        key = check_key(self.path)
        try:
            self._refuse_replaced()
            # under the write lock: is the file as this process (or a check's note) last saw
            # it? Only then does the check note follow the file past this save.
            vouch = checknote.unchanged(self.path, key)
            yield
            conn.execute("COMMIT")
        except BaseException as exc:
            self.kept.clear()  # read inside what is now undone
            if conn.in_transaction:  # SQLite may have rolled back already (e.g. disk full)
                try:
                    conn.execute("ROLLBACK")
                except sqlite3.Error:
                    pass
            if isinstance(exc, sqlite3.Error) and refused_write(exc):
                raise write_error(exc, self.path) from exc
            if isinstance(exc, sqlite3.IntegrityError):  # a CHECK or trigger of the schema
                raise BookError(f"the logbook refused a value ({exc}): nothing was saved") from exc
            if isinstance(exc, UnicodeEncodeError):  # e.g. undecodable bytes from a terminal
                raise BookError(
                    "some text holds characters that are not valid text (a wrong encoding?): "
                    "nothing was saved"
                ) from exc
            raise
        if vouch:
            checknote.saved(self.path, key)
        else:
            checknote.forget(key)

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
        the first write (`deep_check`: unless the check note vouches for the file as it
        stands); damage raises NotALogbook, nothing is written."""
        if self.readonly:
            return
        refuse_known_damage(self.path)
        deep_check(self.path)

    def _refuse_replaced(self) -> None:
        """Under the write lock: the file at `path` is still the one this connection opened (a
        restore of a damaged book puts a new file in its place; a write to the old one would
        be lost)."""
        if self.inode is not None and file_id(self.path) != self.inode:
            raise BookError(
                f"{self.path} was replaced (restored) since it was opened: nothing was saved; "
                "open it again and save once more"
            )

    def now(self) -> datetime:
        """UTC now; a demo book is frozen at the moment its story ends (setting 'clock')."""
        frozen = self.setting("clock")
        return parse_utc(frozen) if frozen else self.clock()

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


# ---- damage found by a check ---------------------------------------------------------------------


def full_check(path: Path) -> list[str]:
    """Everything `store.db.proof` proves of a file coming in, on the live book: SQLite's
    integrity check of the whole file (every page, every index against its table, every
    CHECK), the schema objects exactly as this version makes them, and the register history
    kept by the file (`history_findings`). Nothing is run of the file.

    Damage (a page, an index, a schema object, the history) is recorded beside the book
    (`damage_marker`: writes then refuse it) and raises NotALogbook saying what was found
    and naming the latest backup to restore. Entry rows that break a CHECK are bad values,
    not damage: readers skip them; those not voided yet raise BookError naming them (void
    them), those voided already come back as notes. A pass removes an earlier record."""
    from store.db.proof import (  # deferred: only `sumpbook check` and restores need it
        bad_rows,
        checking,
        header_findings,
        history_findings,
        prove_connection,
        row_findings,
    )

    path = Path(path)
    if not path.is_file():
        raise BookError(f"no logbook at {path}")
    notes: list[str] = []
    seen = checknote.look(path)  # before: a write during the check makes its note not hold
    with no_new_side_files(path):
        inspect(path)
        found = header_findings(path)
        bad: dict[str, list[str]] = {}
        voided: set[str] = set()
        if not found:
            try:
                conn = checking(path)
            except sqlite3.Error as exc:
                found = [f"SQLite cannot open it ({exc})"]
            else:
                try:
                    version, found = prove_connection(conn)
                    tables = row_findings(found)
                    found = [f for f in found if row_table(f) is None]
                    if not found:
                        found = history_findings(conn)
                    if not found:
                        bad = {t: bad_rows(conn, t, version) for t in sorted(tables)}
                        voided = _voided(conn, bad.get("entries", []))
                except sqlite3.DatabaseError as exc:
                    found = [f"SQLite cannot read it ({exc})"]
                finally:
                    conn.close()
        if found:
            what = "; ".join(found)
            record_damage(path, f"full check: {what}")
            raise NotALogbook(
                f"{path} is damaged or was changed outside sumpbook ({what}); nothing was "
                f"written to it; {backup_hint(path)}"
            )
    clear_damage(path)
    checked = check_key(path)
    CHECKED.add(checked)
    checknote.checked(path, checked, seen)
    if not writable(path):  # proof.checking fell back to a read-only connection
        notes.append(
            "the file is write-protected, so its CHECK constraints were not tested again "
            "(SQLite skips them on a read-only connection); copy it somewhere writable to"
            " test them"
        )
    to_void, to_restore = [], []
    for table, keys in bad.items():
        for key in keys:
            if table == "entries" and key in voided:
                notes.append(f"entry {key} breaks a check of the book; it is voided and left out")
            elif table == "entries" and voidable(key):
                to_void.append(f"entries row {key}")
            else:  # a register row, or an entry whose id no void can name
                to_restore.append(f"{table} row {key}")
    if to_void or to_restore:
        if not to_restore:
            way = "void them with 'sumpbook log void ID --reason ...', or restore a backup"
        else:
            way = (
                (
                    f"void {', '.join(to_void)} with 'sumpbook log void ID --reason ...'; "
                    if to_void
                    else ""
                )
                + f"no void can name {'the others' if to_void else 'them'} (a register row, "
                "or an id sumpbook does not make): restore a backup from before they were written"
            )
        raise BookError(
            f"{path} holds rows that break the book's checks (made outside sumpbook): "
            f"{', '.join(to_void + to_restore)}; listings leave them out; {way} "
            f"({backup_hint(path)})"
        )
    return notes


def _voided(conn: sqlite3.Connection, ids: list[str]) -> set[str]:
    if not ids:
        return set()
    marks = ", ".join("?" for _ in ids)
    rows = conn.execute(f"SELECT voids FROM entries WHERE voids IN ({marks})", ids).fetchall()
    return {r[0] for r in rows}


def schema_findings(conn: sqlite3.Connection, version: int, migrations: list[str]) -> list[str]:
    """`store.db.proof.schema_findings`, imported when called: opening a book whose header
    is current (every command line answer) needs neither it nor store.db.backup."""
    from store.db.proof import schema_findings as findings

    return findings(conn, version, migrations)


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
        wrong = schema_findings(conn, SCHEMA_VERSION, MIGRATIONS)
        if not wrong and from_version > 0:  # the upgraded content, checked before it counts
            # bad values the book held are carried as they are; upgrade_beside's proof
            # holds them to the book's own (a new one is refused there)
            verdict = check_verdict(conn, values_ok=True)
            wrong = [] if verdict == "ok" else [verdict]
        if wrong:  # the steps did not make what this version makes: keep the file as it was
            conn.execute("ROLLBACK")
            raise BookError(
                f"the upgrade did not give a sound book of the schema this sumpbook makes "
                f"({'; '.join(wrong[:3])}); the file was left as it was"
            )
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


# Header fields a copy writes its own way (SQLite file format, "The Database Header"): the
# journal-mode bytes 18-19, the change counter 24-27, the page count 28-31, the schema cookie
# 40-43, and version-valid-for and the library's version number 92-99.
_COPY_OWN_HEADER = [(18, 20), (24, 32), (40, 44), (92, 100)]


def same_pages(a: Path, b: Path) -> bool:
    """Two copies of a book hold the same pages (byte for byte, but for the header fields
    each copy writes its own way): nothing was written to the book between them."""
    try:
        with open(a, "rb") as fa, open(b, "rb") as fb:
            head_a, head_b = bytearray(fa.read(100)), bytearray(fb.read(100))
            for start, end in _COPY_OWN_HEADER:
                head_a[start:end] = head_b[start:end] = bytes(end - start)
            if head_a != head_b:
                return False
            while True:
                chunk_a, chunk_b = fa.read(1 << 20), fb.read(1 << 20)
                if chunk_a != chunk_b:
                    return False
                if not chunk_a:
                    return True
    except OSError:
        return False


def upgrade_notice(path: Path, version: int) -> str:
    """What a person hears before the upgrade of a book of schema `version` starts: it reads
    the whole file several times (checked, copied, proven, swapped in), about three minutes
    for five years of a plant of 800 filters on a 2-core machine."""
    return (
        f"upgrading {path} from schema {version} to {SCHEMA_VERSION}: the whole book is "
        f"checked and copied first, and kept as it was in {backup_dir(path)}; a book of "
        "several years takes minutes. Stopping it leaves the book as it was."
    )


def upgrade_beside(path: Path, version: int) -> list[str]:
    """Upgrade the book at `path` from `version` through a side file, as a restore replaces
    it: a copy of the book (backup API, a consistent snapshot) is migrated, proven
    (`store.db.proof.prove_file`, against this sumpbook's MIGRATIONS), and swapped in by
    `backup.swap_in`, which keeps the current book as `<name>-backups/<name>-before-vN-
    upgrade-<stamp>.db` first (refused if it cannot) and holds the book's write lock from
    before that kept copy is read to the swap's commit. A book that changed since the copy
    (the kept copy differs from it: another program saved or upgraded meanwhile) is not
    swapped (BookChanged). Any failure leaves the live file byte for byte as it was.
    Returns what the migration found (rows it could not carry, kept in `quarantine`)."""
    # deferred: only an upgrade and restores need them
    from store.db.backup import BookChanged, copy_to, remove_side_file, swap_in
    from store.db.proof import prove_file

    untouched = f"; {path} was left as it was"
    tag = f"{os.getpid()}"
    original = path.with_name(f"{path.name}.upgrade-from-{tag}")
    side = path.with_name(f"{path.name}.upgrading-{tag}")
    for stale in (original, side):
        remove_side_file(stale)
    try:
        try:
            current = connect(path)  # only reads; closing it last tidies the -wal away
            try:
                copy_to(current, original)  # bad values the book holds named in it
            finally:
                current.close()
            import shutil  # deferred: only an upgrade copies the file

            shutil.copyfile(original, side)
        except (OSError, sqlite3.Error) as exc:
            raise BookError(f"could not copy {path} for its upgrade: {exc}") from exc
        conn = sqlite3.connect(side, isolation_level=None)
        try:
            notices = migrate(conn, version)
        except sqlite3.Error as exc:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise BookError(f"could not upgrade {path}: {exc}") from exc
        finally:
            conn.close()
        prove_file(
            side,
            f"{path} as upgraded to schema {SCHEMA_VERSION}",
            migrations=MIGRATIONS,
            held=original,
        )

        def unchanged(kept: Path) -> bool:
            return same_pages(kept, original)

        swap_in(side, path, f"before-v{version}-upgrade", unchanged=unchanged, values_ok=True)
    except BookChanged:
        raise
    except BookError as exc:
        text = str(exc)
        raise type(exc)(text if text.endswith(untouched) else text + untouched) from exc
    finally:
        for done in (original, side):
            remove_side_file(done)
    return notices


def open_book(
    path: Path | str,
    *,
    create: bool = True,
    readonly: bool = False,
    clock: Callable[[], datetime] | None = None,
    on_upgrade: Callable[[str], None] | None = None,
    _again: bool = False,
) -> Book:
    """Open (and if needed create or migrate) the logbook at `path`.

    An existing file is checked before anything is written to it (`inspect`); a file that is
    write-protected or on read-only media opens read-only (`Book.readonly`), and so does any
    file with `readonly`. `clock` is this run's (store.base.session.Session.clock); the
    computer's when not given. `on_upgrade` is told, in one line for a person, before an
    older book's upgrade starts (minutes on a book of several years: `upgrade_notice`).
    """
    path = Path(path)
    notices: list[str] = []
    new = is_empty_file(path)
    if new and (readonly or not create):
        raise BookError(f"no logbook at {path}: run 'sumpbook demo' or register a unit first")
    if new:
        path.parent.mkdir(parents=True, exist_ok=True)
        clear_damage(path)  # a record of a file that stood here before (inodes are reused)
    readonly = readonly or (not new and not writable(path))
    with no_new_side_files(path):
        version = 0 if new else inspect(path, readonly)
    if 0 < version < SCHEMA_VERSION:
        if on_upgrade is not None and not readonly and not _again:
            on_upgrade(upgrade_notice(path, version))
        deep_check(path)  # before an upgrade writes to it
    try:
        conn = connect(path, readonly=readonly)
    except sqlite3.Error as exc:
        raise BookError(f"cannot open {path}: {exc}") from exc
    try:
        if not new:
            version = check_header(conn, path, quick=False)
            if not readonly and version > 0 and _rollback_mode(path):
                # switching to WAL writes the header: not on a damaged file, nor on one whose
                # tables are not ours (a copy from elsewhere, opened before it is checked)
                deep_check(path)
                wrong = schema_findings(conn, version, MIGRATIONS)
                if wrong:
                    raise NotALogbook(
                        f"{path} does not hold what sumpbook made for schema {version} "
                        f"({'; '.join(wrong[:3])}); it was left untouched; {backup_hint(path)}"
                    )
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
                from store.db.backup import BookChanged  # deferred: an upgrade only

                wrong = schema_findings(conn, version, MIGRATIONS)
                if wrong:
                    raise NotALogbook(
                        f"{path} says schema {version} but does not hold what sumpbook made for "
                        f"it ({'; '.join(wrong[:3])}): it was not upgraded and was left as it "
                        f"was; {backup_hint(path)}"
                    )
                conn.close()
                try:
                    notices = upgrade_beside(path, version)
                except BookChanged:
                    if _again:
                        raise
                    # another program saved to it or upgraded it meanwhile: start again
                    return open_book(
                        path,
                        create=create,
                        readonly=readonly,
                        clock=clock,
                        on_upgrade=on_upgrade,
                        _again=True,
                    )
                conn = connect(path)
                version = check_header(conn, path, quick=False)
            else:
                notices = migrate(conn, version)
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
        CHECKED.add(check_key(path))  # made here and now: nothing to check
    return Book(
        conn=conn,
        path=path,
        readonly=readonly,
        notices=notices,
        inode=file_id(path),
        clock=clock or utc_now,
    )


def _rollback_mode(path: Path) -> bool:
    """In rollback-journal mode: no -wal beside it (SQLite opens a file with one in WAL mode
    whatever its header says) and the header says so."""
    if Path(f"{path}-wal").exists():
        return False
    try:
        with open(path, "rb") as handle:
            head = handle.read(20)
    except OSError:
        return False
    return len(head) == 20 and head[18] == 1


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
    against 11 s on a busy 2-core machine), too long to run behind every start.

    A file that looks exactly as a checked session left it, less than a day ago (the check
    note, store/db/checknote.py), is taken as checked.

    Read-only, SQLite's check does not evaluate the tables' CHECK constraints row by row:
    15 times as fast on the one-year book (0.24 s against 3.66 s), and the same verdict, since
    a row breaking a CHECK is a bad value the readers skip and note, not damage
    (`check_verdict(values_ok=True)` passes over such findings anyway)."""
    key = check_key(path)
    if key in CHECKED:
        return
    if checknote.holds(path, key):  # as a checked session left it, less than a day ago
        CHECKED.add(key)
        return
    conn = _checking_connection(path, readonly=True)
    try:
        _quick_check(conn, path)
    finally:
        conn.close()


def _checking_connection(path: Path, readonly: bool) -> sqlite3.Connection:
    try:
        return connect(path, readonly=readonly)
    except sqlite3.Error as exc:
        raise NotALogbook(
            f"{path} is not a sumpbook logbook or is damaged ({exc}); it was left untouched; "
            f"{backup_hint(path)}"
        ) from exc


_CHECKING: dict[str, threading.Lock] = {}  # one whole-file check of a file at a time


def _quick_check(conn: sqlite3.Connection, path: Path) -> None:
    """The whole-file quick check, once per file and process. A second caller while one runs
    (the app's first save in its thread during the check behind the first paint) waits for
    that one instead of reading the whole file a second time beside it."""
    key = check_key(path)
    with _CHECKING.setdefault(key, threading.Lock()):
        if key in CHECKED:
            return
        _quick_check_now(conn, path)


def _quick_check_now(conn: sqlite3.Connection, path: Path) -> None:
    seen = checknote.look(path)  # before: a write during the check makes the note not hold
    try:
        ok = check_verdict(conn, values_ok=True)
    except sqlite3.DatabaseError as exc:
        ok = str(exc)
    if ok != "ok":
        record_damage(path, f"quick check: {ok}")
        raise NotALogbook(
            f"{path} is damaged (quick check: {ok}); nothing was written to it; {backup_hint(path)}"
        )
    CHECKED.add(check_key(path))
    checknote.checked(path, check_key(path), seen)
