"""`sumpbook sync`: this book and its plant's rows on the central server, both ways.

Order of one sync, all under a per-plant advisory lock on the server (one laptop of a plant
syncs at a time; other plants are not held up):

1. **Pull.** The plant's register, then its register changes and entries the server took
   after this book's cursor (`seq`, the order the server took them), in batches. Each batch
   is written into a throw-away logbook file and brought in by `store.exchange.merge.merge`,
   the same door as a copied file: every row passes merge's row checks (validate.py), the
   register and the entries already here decide, conflicts are reported and not guessed. The
   batch and the cursor land in one transaction of the book.
2. **Push.** The register rows (a tag the plant has on the server keeps the server's row:
   the first laptop's settings stand, as the book's own settings stand in a merge), then the
   register changes and entries this book wrote after its push cursor (its own rowids), in
   batches: COPY into a temporary table, then one INSERT ... ON CONFLICT DO NOTHING into the
   plant's rows, in one server transaction; the book's cursor moves after the commit.
3. The pull cursor moves to the plant's newest row: under the lock, everything after the old
   cursor was either pulled or pushed by this sync.

A sync killed at any moment leaves whole batches on both sides and cursors that lag at most:
the next sync pulls or pushes a batch again and both doors take nothing twice (merge by
UUID, the server by its keys). Rows left out at the door (a conflict to settle) are passed by
the cursor: `sync --full` reads every row of the plant again once they are settled.
Nothing of the server's address is kept in the book; the cursors are settings of the book.
"""

from __future__ import annotations

import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from store.base import validate
from store.base.errors import BookError
from store.base.timeutil import format_utc
from store.db.book import Book, open_book
from store.exchange.merge import MergeReport, merge
from store.server.address import connect, scrub, shown
from store.server.schema import (
    ENTRY_NAMES,
    LOG_NAMES,
    REGISTER_COLUMNS,
    REGISTER_TABLES,
    SERVER_VERSION,
)

if TYPE_CHECKING:
    import psycopg

# Settings of the book (never the address): which plant on which server, and how far.
PLANT_KEY = "server_plant"
SERVER_KEY = "server_id"
PUSHED_KEY = "server_pushed_rowid"
PUSHED_LOG_KEY = "server_pushed_log_rowid"
PULLED_KEY = "server_pulled_seq"
PULLED_LOG_KEY = "server_pulled_log_seq"
SYNCED_KEY = "server_synced_utc"
CURSORS = (PUSHED_KEY, PUSHED_LOG_KEY, PULLED_KEY, PULLED_LOG_KEY)
BATCH_ROWS = 20_000
LOCK_WAIT = "30s"
MAX_CONFLICT_LINES = 12


@dataclass
class SyncReport:
    server: str
    plant: str
    pulled_entries: int = 0
    pulled_known: int = 0
    pulled_log: int = 0
    register_taken: int = 0
    pushed_entries: int = 0
    pushed_known: int = 0
    pushed_log: int = 0
    register_pushed: int = 0
    left_out: int = 0
    conflicts: list[str] = field(default_factory=list)

    def summary(self) -> str:
        parts = [
            f"synced plant {self.plant} with {self.server}: "
            f"{self.pushed_entries} entries sent, {self.pulled_entries} brought in"
        ]
        if self.register_pushed or self.register_taken:
            parts.append(f"register: {self.register_pushed} sent, {self.register_taken} brought in")
        if self.pushed_log or self.pulled_log:
            parts.append(f"register changes: {self.pushed_log} sent, {self.pulled_log} brought in")
        if self.left_out:
            parts.append(
                f"{self.left_out} entries left out (see the conflicts; settle them, then "
                "'sumpbook sync --full')"
            )
        parts.append(f"{len(self.conflicts)} conflicts" if self.conflicts else "no conflicts")
        return "; ".join(parts)

    def note(self, lines: list[str]) -> None:
        for line in lines:
            if line not in self.conflicts:
                self.conflicts.append(line)


def plant_code(book: Book, given: str | None) -> str:
    """The book's plant on the server: given once (`--plant`), then kept in the book."""
    code = given or book.setting(PLANT_KEY)
    if not code:
        raise BookError(
            "this book has no plant code on the server yet: give it once with --plant CODE "
            "(letters and digits; every laptop of the plant uses the same)"
        )
    return validate.tag(code, "plant code")


def last_synced(book: Book) -> str | None:
    """When this book last completed a sync (UTC stamp), or None."""
    return book.setting(SYNCED_KEY)


def sync(
    book: Book,
    conninfo: str,
    plant: str | None = None,
    full: bool = False,
    batch_rows: int = BATCH_ROWS,
) -> SyncReport:
    """Bring the book and the server's rows of its plant level (see the module docstring)."""
    if book.readonly:
        raise BookError(f"{book.path} is read-only: it cannot be synced")
    code = plant_code(book, plant)
    book.ensure_checked()
    conn = connect(conninfo)  # no server: one line, nothing written
    report = SyncReport(server=shown(conninfo), plant=code)
    try:
        server_id = _check_server(conn)
        cursors = _cursors(book, code, server_id, full)
        with _plant_lock(conn, code):
            conn.execute(
                "INSERT INTO plants (plant, name) VALUES (%s, %s) ON CONFLICT DO NOTHING",
                [code, validate.one_line(book.setting("name", "") or "", 80)],
            )
            with book.atomic():
                for key, value in ((PLANT_KEY, code), (SERVER_KEY, server_id)):
                    book.set_setting(key, value)
                for key in CURSORS:
                    table = PUSHED_TABLES.get(key)
                    mark = _row_mark(book, table, cursors[key]) if table else str(cursors[key])
                    book.set_setting(key, mark)
            _push_register(book, conn, code, report)  # first: this book's newer changes stand
            _pull(book, conn, code, cursors, report, batch_rows)
            _push_rows(book, conn, code, "register_log", LOG_NAMES, PUSHED_LOG_KEY, cursors,
                       batch_rows, report)  # fmt: skip
            _push_rows(book, conn, code, "entries", ENTRY_NAMES, PUSHED_KEY, cursors, batch_rows,
                       report)  # fmt: skip
            newest = conn.execute(
                "SELECT (SELECT coalesce(max(seq), 0) FROM entries WHERE plant = %s), "
                "(SELECT coalesce(max(seq), 0) FROM register_log WHERE plant = %s)",
                [code, code],
            ).fetchone()
            with book.atomic():
                book.set_setting(PULLED_KEY, str(newest[0]))
                book.set_setting(PULLED_LOG_KEY, str(newest[1]))
                book.set_setting(SYNCED_KEY, format_utc(book.now()))
    except _server_errors() as exc:
        raise BookError(
            f"the sync with {shown(conninfo)} stopped: {scrub(str(exc), conninfo)}; what was "
            "sent or brought in before stays, the next sync goes on from there"
        ) from None
    finally:
        conn.close()
    return report


def _server_errors() -> tuple[type[BaseException], ...]:
    import psycopg  # deferred with the rest of the server tier

    return (psycopg.Error,)


def _check_server(conn: psycopg.Connection) -> str:
    import psycopg

    try:
        rows = dict(conn.execute("SELECT key, value FROM sumpbook_meta").fetchall())
    except psycopg.errors.UndefinedTable:
        raise BookError(
            "the server holds no sumpbook schema: its owner runs 'sumpbook server init URL'"
        ) from None
    version = int(rows.get("version", "0"))
    if version > SERVER_VERSION:
        raise BookError(
            f"the server's schema is version {version}, newer than this sumpbook knows "
            f"({SERVER_VERSION}): update sumpbook on this laptop"
        )
    if version < SERVER_VERSION:
        raise BookError(
            f"the server's schema is version {version}: its owner runs 'sumpbook server init' "
            "to upgrade it"
        )
    return rows["server_id"]


def _cursors(book: Book, code: str, server_id: str, full: bool) -> dict[str, int]:
    """The book's cursors; all from the start on another server, another plant, or --full
    (the pushed rows are sent again: the server keeps what it has). A push cursor is a rowid
    and the id of the row it named: if that row has another rowid now (a table rebuilt by an
    upgrade, a VACUUM), everything is sent again rather than a row skipped."""
    same = book.setting(SERVER_KEY) == server_id and book.setting(PLANT_KEY) == code
    out: dict[str, int] = {}
    for key in CURSORS:
        text = book.setting(key, "0") or "0"
        try:
            value = int(text.split(" ")[0]) if same and not full else 0
        except ValueError:
            value = 0
        table = PUSHED_TABLES.get(key)
        if table and value and _row_mark(book, table, value) != text:
            value = 0
        out[key] = value
    return out


PUSHED_TABLES = {PUSHED_KEY: "entries", PUSHED_LOG_KEY: "register_log"}


def _row_mark(book: Book, table: str, rowid: int) -> str:
    """A push cursor as kept: the rowid and the id of the row it names."""
    if not rowid:
        return "0"
    row = book.conn.execute(f"SELECT id FROM {table} WHERE rowid = ?", [rowid]).fetchone()
    return f"{rowid} {row[0] if row else '-'}"


@contextmanager
def _plant_lock(conn: psycopg.Connection, code: str) -> Iterator[None]:
    import psycopg

    conn.execute(f"SET lock_timeout = '{LOCK_WAIT}'")
    try:
        conn.execute("SELECT pg_advisory_lock(hashtext('sumpbook plant ' || %s))", [code])
    except psycopg.errors.LockNotAvailable:
        raise BookError(
            f"another laptop of plant {code} is syncing: try again in a minute"
        ) from None
    try:
        yield
    finally:
        if not conn.closed and not conn.broken:
            conn.execute("SELECT pg_advisory_unlock(hashtext('sumpbook plant ' || %s))", [code])


# ---- pull ----------------------------------------------------------------------------------------


def _pull(
    book: Book,
    conn: psycopg.Connection,
    code: str,
    cursors: dict[str, int],
    report: SyncReport,
    batch_rows: int,
) -> None:
    register = {
        table: _dicts(
            conn.execute(
                f"SELECT {_names(c for c, _ in REGISTER_COLUMNS[table])} FROM {table} "
                "WHERE plant = %s ORDER BY tag",
                [code],
            )
        )
        for table in REGISTER_TABLES
    }
    first = True
    while True:
        log = _dicts(
            conn.execute(
                f"SELECT seq, {_names(LOG_NAMES)} FROM register_log WHERE plant = %s "
                "AND seq > %s ORDER BY seq LIMIT %s",
                [code, cursors[PULLED_LOG_KEY], batch_rows],
            )
        )
        entries = _dicts(
            conn.execute(
                f"SELECT seq, {_names(ENTRY_NAMES)} FROM entries WHERE plant = %s "
                "AND seq > %s ORDER BY seq LIMIT %s",
                [code, cursors[PULLED_KEY], batch_rows],
            )
        )
        if not (log or entries or first):
            return
        first = False  # the register comes in even when no entry is new
        with tempfile.TemporaryDirectory(prefix="sumpbook-pull-") as folder:
            path = Path(folder) / "server.db"
            refused = _write_pull_book(path, register, log, entries)
            with book.atomic():  # the batch and its cursors together
                before = _max_rowid(book)
                merged = merge(book, path)
                if cursors[PUSHED_KEY] >= before:  # pulled rows need not go back up
                    cursors[PUSHED_KEY] = _max_rowid(book)
                    book.set_setting(PUSHED_KEY, _row_mark(book, "entries", cursors[PUSHED_KEY]))
                if log:
                    cursors[PULLED_LOG_KEY] = log[-1]["seq"]
                    book.set_setting(PULLED_LOG_KEY, str(cursors[PULLED_LOG_KEY]))
                if entries:
                    cursors[PULLED_KEY] = entries[-1]["seq"]
                    book.set_setting(PULLED_KEY, str(cursors[PULLED_KEY]))
        _count(report, merged)
        if refused:
            report.left_out += refused
            report.conflicts.append(
                f"{refused} rows from the server left out: the logbook file's own checks refuse "
                "them (written into the server by another program?)"
            )
        if not (log or entries):
            return


def _count(report: SyncReport, merged: MergeReport) -> None:
    report.pulled_entries += merged.entries_added
    report.pulled_known += merged.entries_known
    report.pulled_log += merged.log_added
    report.register_taken += len(merged.register_added)
    report.left_out += merged.entries_left_out
    report.note(
        [
            line.replace("the other book", "the server").replace("other book", "server")
            for line in merged.conflicts
        ]
    )


def _write_pull_book(
    path: Path,
    register: dict[str, list[dict[str, Any]]],
    log: list[dict[str, Any]],
    entries: list[dict[str, Any]],
) -> int:
    """A throw-away logbook holding the server's rows as they came, for merge to read as it
    reads any other laptop's file. A row the file's own checks refuse is left out of it
    (OR IGNORE) and so never reaches the book; foreign keys are off, so an entry naming a
    tag the server has no row for still reaches merge, which says why it stays out.
    Returns how many log rows and entries the file refused."""
    with open_book(path, create=True) as made:
        made.conn.execute("DELETE FROM settings")  # nothing of a plant's settings comes in
        conn = made.conn
        conn.execute("PRAGMA foreign_keys = OFF")
        conn.execute("BEGIN")
        for table in REGISTER_TABLES:
            names = [c for c, _ in REGISTER_COLUMNS[table]]
            _insert(conn, table, names, register[table])
        refused = _insert(conn, "register_log", LOG_NAMES, log)
        refused += _insert(conn, "entries", ENTRY_NAMES, entries)
        conn.execute("COMMIT")
    return refused


def _insert(conn: Any, table: str, names: list[str], rows: list[dict[str, Any]]) -> int:
    """The rows the file takes; returns how many it refused."""
    sql = (
        f"INSERT OR IGNORE INTO {table} ({_names(names)}) VALUES ({', '.join('?' for _ in names)})"
    )
    before = conn.total_changes
    conn.executemany(sql, ([_plain(row[n]) for n in names] for row in rows))
    return len(rows) - (conn.total_changes - before)


def _plain(value: Any) -> Any:
    """A server value as the book stores it (a UUID as its text)."""
    if value is None or isinstance(value, str | int | float):
        return value
    return str(value)


def _max_rowid(book: Book) -> int:
    return book.conn.execute("SELECT coalesce(max(rowid), 0) FROM entries").fetchone()[0]


# ---- push ----------------------------------------------------------------------------------------


def _push_register(book: Book, conn: psycopg.Connection, code: str, report: SyncReport) -> None:
    """Every register record of the book, stamped with its newest register change and how
    many it has had: a tag new to the plant is added, a tag whose change here is newer than
    the server's replaces it, any other stays as the server has it (the pull then lists the
    difference, as merge does)."""
    with conn.transaction():
        for table in REGISTER_TABLES:
            names = [c for c, _ in REGISTER_COLUMNS[table]]
            rows = book.conn.execute(
                f"SELECT {', '.join(f't.{chr(34)}{n}{chr(34)}' for n in names)}, "
                "coalesce((SELECT max(l.at_utc) FROM register_log l WHERE l.tbl = ? "
                "AND l.tag = t.tag), '1970-01-01T00:00:00Z'), "
                "(SELECT count(*) FROM register_log l WHERE l.tbl = ? AND l.tag = t.tag) "
                f"FROM {table} t",
                [table, table],
            ).fetchall()
            if not rows:
                continue
            stamped = [*names, "changed_utc", "changes"]
            columns = _names(stamped)
            updates = ", ".join(f'"{n}" = EXCLUDED."{n}"' for n in stamped)
            with conn.cursor() as cur:
                cur.executemany(
                    f"INSERT INTO {table} AS s (plant, {columns}) VALUES "
                    f"(%s, {', '.join('%s' for _ in stamped)}) "
                    f"ON CONFLICT (plant, tag) DO UPDATE SET {updates} "
                    "WHERE (s.changed_utc, s.changes) < (EXCLUDED.changed_utc, EXCLUDED.changes)",
                    [[code, *row] for row in rows],
                )
                report.register_pushed += max(cur.rowcount, 0)


def _push_rows(
    book: Book,
    conn: psycopg.Connection,
    code: str,
    table: str,
    names: list[str],
    key: str,
    cursors: dict[str, int],
    batch_rows: int,
    report: SyncReport,
) -> None:
    staging = f"sync_{table}"
    conn.execute(
        f"CREATE TEMP TABLE IF NOT EXISTS {staging} ON COMMIT DELETE ROWS AS "
        f"SELECT 0::bigint AS ord, {_names(names)} FROM {table} WITH NO DATA"
    )
    while True:
        rows = book.conn.execute(
            f"SELECT rowid, {_names(names)} FROM {table} WHERE rowid > ? ORDER BY rowid LIMIT ?",
            [cursors[key], batch_rows],
        ).fetchall()
        if not rows:
            return
        with conn.transaction():
            with conn.cursor() as cur:
                with cur.copy(f"COPY {staging} (ord, {_names(names)}) FROM STDIN") as copy:
                    for row in rows:
                        copy.write_row(row)
                cur.execute(
                    f"INSERT INTO {table} (plant, {_names(names)}) SELECT %s, {_names(names)} "
                    f"FROM {staging} ORDER BY ord ON CONFLICT DO NOTHING",
                    [code],
                )
                added = max(cur.rowcount, 0)
        if table == "entries":
            report.pushed_entries += added
            report.pushed_known += len(rows) - added
        else:
            report.pushed_log += added
        cursors[key] = rows[-1][0]
        book.set_setting(key, f"{rows[-1][0]} {rows[-1][1]}")  # rowid and id (see _cursors)


# ---- small helpers -------------------------------------------------------------------------------


def _names(names: Any) -> str:
    return ", ".join(f'"{n}"' for n in names)


def _dicts(cursor: Any) -> list[dict[str, Any]]:
    names = [d.name for d in cursor.description]
    return [dict(zip(names, row, strict=True)) for row in cursor.fetchall()]
