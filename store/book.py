"""Opening a logbook file: connection settings, header checks and migrations."""

from __future__ import annotations

import os
import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, tzinfo
from pathlib import Path

import sqlite_utils
from platformdirs import user_data_dir

from .errors import BookError, NotALogbook, TooNew
from .schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION
from .timeutil import parse_utc, utc_now, zone

BUSY_TIMEOUT_MS = 10_000
ENV_DB = "SUMPBOOK_DB"


def default_path() -> Path:
    """Where the logbook lives unless --db or SUMPBOOK_DB say otherwise."""
    if os.environ.get(ENV_DB):
        return Path(os.environ[ENV_DB]).expanduser()
    return Path(user_data_dir("sumpbook", appauthor=False)) / "logbook.db"


@dataclass
class Book:
    """An open logbook. `db` is the sqlite-utils handle; `path` the file."""

    db: sqlite_utils.Database
    path: Path

    @property
    def conn(self) -> sqlite3.Connection:
        return self.db.conn

    def close(self) -> None:
        self.db.conn.close()

    def __enter__(self) -> Book:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def atomic(self) -> Iterator[None]:
        """All writes inside land together or not at all (BEGIN IMMEDIATE takes the write lock)."""
        conn = self.conn
        if conn.in_transaction:
            yield
            return
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")

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
        with self.atomic():
            self.conn.execute(
                "INSERT INTO settings(key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                [key, value],
            )


def _connect(path: Path, readonly: bool = False) -> sqlite3.Connection:
    uri = f"file:{path}?mode={'ro' if readonly else 'rwc'}"
    conn = sqlite3.connect(
        uri, uri=True, isolation_level=None, check_same_thread=True, timeout=BUSY_TIMEOUT_MS / 1000
    )
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


def _is_empty_file(path: Path) -> bool:
    return not path.exists() or path.stat().st_size == 0


def check_header(conn: sqlite3.Connection, path: Path) -> int:
    """Return the schema version; refuse files that are not ours or are damaged."""
    try:
        app_id = conn.execute("PRAGMA application_id").fetchone()[0]
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        ok = conn.execute("PRAGMA quick_check").fetchone()[0]
    except sqlite3.DatabaseError as exc:
        raise NotALogbook(f"{path} is not a sumpbook logbook or is damaged ({exc})") from exc
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


def migrate(conn: sqlite3.Connection, from_version: int) -> None:
    """Apply every pending step in one transaction, with the version bump inside it."""
    pending = MIGRATIONS[from_version:]
    if not pending:
        return
    script = "\n".join(pending)
    conn.executescript(
        "BEGIN IMMEDIATE;\n"
        f"{script}\n"
        f"PRAGMA application_id = {APPLICATION_ID};\n"
        f"PRAGMA user_version = {SCHEMA_VERSION};\n"
        "COMMIT;"
    )


def open_book(path: Path | str | None = None, *, create: bool = True) -> Book:
    """Open (and if needed create or migrate) the logbook at `path`."""
    path = Path(path) if path is not None else default_path()
    new = _is_empty_file(path)
    if new and not create:
        raise BookError(f"no logbook at {path}: run 'sumpbook demo' or register a unit first")
    if new:
        path.parent.mkdir(parents=True, exist_ok=True)
    try:
        conn = _connect(path)
    except sqlite3.Error as exc:
        raise BookError(f"cannot open {path}: {exc}") from exc
    try:
        version = 0 if new else check_header(conn, path)
        if version < SCHEMA_VERSION:
            if not new:
                from .backup import backup_before_migration

                backup_before_migration(conn, path, version)
            try:
                migrate(conn, version)
            except sqlite3.Error as exc:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise BookError(f"could not upgrade {path}: {exc}; it was left as it was") from exc
        conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA synchronous = FULL")
    except BaseException:
        conn.close()
        raise
    return Book(db=sqlite_utils.Database(conn), path=path)
