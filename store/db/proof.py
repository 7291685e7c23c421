"""Proving a logbook file good before it may stand in the live book's place (restore, demo
over an existing book) and what `sumpbook check` verifies.

A file is proven on a read-only connection; nothing in it is run (no view is read, no
trigger fires: only `sqlite_master`, the header pragmas and SQLite's integrity check, which
also tests every CHECK and NOT NULL constraint of every row). It must hold:

- SQLite's header and our application id, and a schema version this sumpbook knows (1..N);
- a clean `PRAGMA integrity_check` (pages, indexes against tables, every CHECK);
- exactly the schema objects this version of sumpbook makes for that schema version: the same
  tables, columns, indexes, views and triggers with the same SQL, nothing more and nothing
  less (a trigger dropped or added by hand, a view rewritten, fails).

`reference_schema(version)` builds the expected objects by running MIGRATIONS up to that
version in a database in memory: the same scripts that made (or upgraded) the file.
"""

from __future__ import annotations

import json
import re
import sqlite3
from functools import lru_cache
from pathlib import Path

from store.base.errors import NotALogbook, TooNew
from store.db.connection import EVERY_FINDING, row_table
from store.db.schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION

SQLITE_MAGIC = b"SQLite format 3\x00"
MAX_FINDINGS = 8

# What SQLite itself may add to a book that we did not make (ANALYZE statistics).
_SQLITE_OWN = re.compile(r"^sqlite_stat\d$")


def _normal_sql(sql: str | None) -> str | None:
    return None if sql is None else " ".join(sql.split())


def _objects(conn: sqlite3.Connection) -> dict[tuple[str, str], tuple[str, str | None]]:
    rows = conn.execute("SELECT type, name, tbl_name, sql FROM sqlite_master").fetchall()
    return {
        (str(kind), str(name)): (str(table), _normal_sql(sql))
        for kind, name, table, sql in rows
        if not _SQLITE_OWN.match(str(name))
    }


def reference_schema(
    version: int, migrations: list[str] | None = None
) -> dict[tuple[str, str], tuple[str, str | None]]:
    """The schema objects a book of `version` holds when this sumpbook made or upgraded it."""
    return _reference(tuple((MIGRATIONS if migrations is None else migrations)[:version]))


@lru_cache(maxsize=8)
def _reference(steps: tuple[str, ...]) -> dict[tuple[str, str], tuple[str, str | None]]:
    conn = sqlite3.connect(":memory:", isolation_level=None)
    try:
        conn.execute("PRAGMA foreign_keys = OFF")
        conn.executescript("BEGIN;\n" + "\n".join(steps) + "\nCOMMIT;")
        return _objects(conn)
    finally:
        conn.close()


def schema_findings(
    conn: sqlite3.Connection, version: int, migrations: list[str] | None = None
) -> list[str]:
    """How the schema objects of the open file differ from those of `version`, in words."""
    want = reference_schema(version, migrations)
    have = _objects(conn)
    found: list[str] = []
    for key in sorted(have.keys() - want.keys()):
        found.append(f"a {key[0]} '{key[1]}' that sumpbook does not make")
    for key in sorted(want.keys() - have.keys()):
        found.append(f"the {key[0]} '{key[1]}' is missing")
    for key in sorted(want.keys() & have.keys()):
        if want[key] != have[key]:
            found.append(f"the {key[0]} '{key[1]}' was changed")
    return found


def header_findings(path: Path) -> list[str]:
    """The first 100 bytes: SQLite's magic string and a page size it accepts."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(100)
    except OSError as exc:
        return [f"it cannot be read ({exc.strerror or exc})"]
    if len(head) < 100 or not head.startswith(SQLITE_MAGIC):
        return ["it is not an SQLite file (empty, cut short or another kind of file)"]
    return []


def integrity_findings(conn: sqlite3.Connection, limit: int = MAX_FINDINGS) -> list[str]:
    try:
        rows = conn.execute(f"PRAGMA integrity_check({limit})").fetchall()
    except sqlite3.DatabaseError as exc:
        return [f"SQLite cannot read it ({exc})"]
    found = [str(r[0]) for r in rows]
    return [] if found == ["ok"] else found


def prove_connection(
    conn: sqlite3.Connection, migrations: list[str] | None = None
) -> tuple[int, list[str]]:
    """(schema version, findings) of an open file; no findings means proven good.
    `migrations`: the steps to prove against (this sumpbook's MIGRATIONS when None)."""
    known = len(MIGRATIONS if migrations is None else migrations)
    try:
        app_id = conn.execute("PRAGMA application_id").fetchone()[0]
        version = conn.execute("PRAGMA user_version").fetchone()[0]
    except sqlite3.DatabaseError as exc:
        return 0, [f"SQLite cannot read it ({exc})"]
    if app_id != APPLICATION_ID:
        return version, ["it is not a sumpbook logbook (no sumpbook application id)"]
    if not 1 <= version <= known:
        return version, [
            f"its schema version {version} is not one this sumpbook knows (1 to {known})"
        ]
    found = integrity_findings(conn)
    if any(row_table(f) for f in found):  # bad values listed: read on past every one of them
        found = damage_first(integrity_findings(conn, EVERY_FINDING))
    try:
        found += schema_findings(conn, version, migrations)
        if not found:
            found += text_findings(conn)
    except sqlite3.DatabaseError as exc:
        found.append(f"its schema cannot be read ({exc})")
    damage = [f for f in found if row_table(f) is None]
    return version, damage[:MAX_FINDINGS] + [f for f in found if row_table(f)]


def damage_first(found: list[str]) -> list[str]:
    """A check's findings with the damage first, then one line for each table holding rows
    that break a CHECK or NOT NULL (SQLite writes one line per row)."""
    rows = {row_table(f): f for f in found if row_table(f)}
    return [f for f in found if row_table(f) is None] + list(rows.values())


def text_findings(conn: sqlite3.Connection, limit: int = 3) -> list[str]:
    """Text values that are not UTF-8 (a flipped bit inside a text: the integrity check does
    not look at what a text holds, and every reader would stop on it). Reads the text
    columns of our tables as bytes; only the values that are not plain ASCII are decoded."""
    tables = [
        r[0]
        for r in conn.execute(
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'"
        )
    ]
    text_columns = {
        table: [
            r[1] for r in conn.execute(f'PRAGMA table_info("{table}")') if "TEXT" in r[2].upper()
        ]
        for table in tables
    }
    found: list[str] = []
    before = conn.text_factory
    conn.text_factory = bytes
    try:
        for table, columns in text_columns.items():
            if not columns:
                continue
            names = ", ".join(f'"{c}"' for c in columns)
            for row in conn.execute(f'SELECT {names} FROM "{table}"'):
                for column, value in zip(columns, row, strict=True):
                    if value.__class__ is bytes and not value.isascii():
                        try:
                            value.decode("utf-8")
                        except UnicodeDecodeError:
                            found.append(f"a text in {table}.{column} is not UTF-8 text")
                            break
                if len(found) >= limit:
                    return found
    finally:
        conn.text_factory = before
    return found


def _uri(path: Path, mode: str) -> str:
    text = str(Path(path).resolve()).replace("%", "%25").replace("?", "%3f").replace("#", "%23")
    return f"file:{text}?mode={mode}"


def read_only(path: Path) -> sqlite3.Connection:
    """A read-only connection that runs nothing of the file (no triggers can fire on a
    read-only connection; `trusted_schema` off keeps functions out of its views)."""
    for uri in (_uri(path, "ro"), _uri(path, "ro") + "&immutable=1"):
        conn = sqlite3.connect(uri, uri=True, isolation_level=None, timeout=10)
        try:
            conn.execute("PRAGMA trusted_schema = OFF")
            conn.execute("PRAGMA query_only = ON")
            conn.execute("PRAGMA schema_version").fetchone()  # opens the file
        except sqlite3.OperationalError:
            # a WAL file in a write-protected folder (no -shm can be made there): read it
            # as it stands
            conn.close()
            if "immutable" in uri:
                raise
            continue
        return conn
    raise AssertionError("unreachable")


def checking(path: Path) -> sqlite3.Connection:
    """A connection for proving a file: opened for writing when the file and folder allow
    it, but with `query_only` on (it writes nothing and fires no trigger). SQLite 3.40's
    integrity check leaves the CHECK constraints out on a connection opened read-only
    (measured: a row breaking a CHECK passes it there), so read-only is the fallback for a
    write-protected file only, and there the CHECKs go untested."""
    try:
        conn = sqlite3.connect(_uri(path, "rw"), uri=True, isolation_level=None, timeout=10)
        conn.execute("PRAGMA trusted_schema = OFF")
        conn.execute("PRAGMA query_only = ON")
        conn.execute("PRAGMA schema_version").fetchone()
        return conn
    except sqlite3.OperationalError:
        return read_only(path)


def prove_file(
    path: Path,
    label: str,
    rows_ok: bool = False,
    migrations: list[str] | None = None,
    held: Path | None = None,
    carried: bool = False,
) -> int:
    """The schema version of the file at `path`, proven good; NotALogbook naming `label`
    (how the person knows the file) and everything found otherwise. `rows_ok`: rows that
    break a CHECK or NOT NULL are let through, and indexes, views and triggers other than
    ours (a merge reads the base tables only, and checks every row itself). `held`: the file
    `path` was upgraded from (at its own version); rows that break a CHECK or NOT NULL are
    let through where it held the very same ones (their keys, table by table): the upgrade
    carried them as they were, and every reader skips and notes them, as before it.
    `carried` (a restore): such rows are let through where the file names the very same ones
    itself (`CARRIED_SETTING`, written by `carry_bad_rows` into a copy of a book holding
    them); a bit flipped in a copy reads as another bad row, or as damage, and is refused."""
    path = Path(path)
    found = header_findings(path)
    version = 0
    if not found:
        try:
            conn = checking(path)
        except sqlite3.Error as exc:
            found = [f"SQLite cannot open it ({exc})"]
        else:
            try:
                version, found = prove_connection(conn, migrations)
                if (held is not None or carried) and found and all(map(row_table, found)):
                    found = _beyond_carried(conn, version, held, carried, found)
            finally:
                conn.close()
            if rows_ok:  # what a merge reads: the base tables, each row checked by itself
                found = [f for f in found if not row_table(f) and not _NOT_READ.match(f)]
    if found and version > SCHEMA_VERSION and found[0].startswith("its schema version"):
        raise TooNew(
            f"{label} was written by a newer sumpbook (schema {version}, this one knows "
            f"{SCHEMA_VERSION}): update sumpbook to restore it"
        )
    if found:
        raise NotALogbook(f"{label} is not a sound logbook: " + "; ".join(found))
    return version


_NOT_READ = re.compile(r"^(a|the) (index|view|trigger) ")


def row_findings(findings: list[str]) -> set[str]:
    """The tables named by the integrity check's row findings (a CHECK or NOT NULL broken
    by a row: a bad value, not a damaged file)."""
    return {t for f in findings if (t := row_table(f))}


def _beyond_carried(
    conn: sqlite3.Connection, version: int, held: Path | None, carried: bool, found: list[str]
) -> list[str]:
    """`found` (only rows that break a CHECK or NOT NULL, every table of them: see
    `prove_connection`) where those rows are not all carried (`prove_file`'s `held` and
    `carried`), else what the rows kept unread (`text_findings`)."""
    rows = bad_row_keys(conn, version, row_findings(found))
    kept = (held is not None and _held_too(rows, held)) or (carried and rows == carried_rows(conn))
    return text_findings(conn) if kept else found


def _held_too(rows: dict[str, list[str]], held: Path) -> bool:
    """Whether every row of `rows` (by table) broke its constraints in the file `held` too."""
    try:
        before = checking(held)
    except sqlite3.Error:
        return False
    try:
        was = before.execute("PRAGMA user_version").fetchone()[0]
        return all(
            set(keys) <= set(bad_rows(before, table, was, None)) for table, keys in rows.items()
        )
    except sqlite3.Error:
        return False
    finally:
        before.close()


# A copy of a book that holds rows breaking a CHECK or NOT NULL (values stored outside
# sumpbook: every reader skips and notes them, and entries stay for good, voided or not)
# names those rows in its own settings, as {table: [keys]}: a restore of it lets through
# those rows and no others.
CARRIED_SETTING = "carried_bad_rows"


def bad_row_keys(conn: sqlite3.Connection, version: int, tables: set[str]) -> dict[str, list[str]]:
    """`bad_rows` of each of `tables`, every one, sorted: {table: [keys]}."""
    return {t: sorted(bad_rows(conn, t, version, None)) for t in sorted(tables)}


def carried_rows(conn: sqlite3.Connection) -> dict[str, list[str]] | None:
    """The rows a copy names as carried (`CARRIED_SETTING`), or None (none named, or not
    readable as such)."""
    try:
        row = conn.execute("SELECT value FROM settings WHERE key = ?", [CARRIED_SETTING]).fetchone()
        named = json.loads(row[0]) if row else None
    except (sqlite3.Error, ValueError, TypeError):
        return None
    if not isinstance(named, dict) or not all(
        isinstance(keys, list) and all(isinstance(k, str) for k in keys) for keys in named.values()
    ):
        return None
    return named


def carry_bad_rows(copy: sqlite3.Connection, source: sqlite3.Connection | None) -> str:
    """The check of a fresh copy of a book (open for writing): "ok", or its first finding.
    Rows that break a CHECK or NOT NULL pass where `source`, the book the copy was made
    from, holds the very same ones (None: the copy is the book's bytes), and are then named
    in the copy (`CARRIED_SETTING`) for a restore to let through. Anything else found, or a
    bad row the book does not hold, refuses the copy."""
    found = [str(r[0]) for r in copy.execute(f"PRAGMA quick_check({EVERY_FINDING})")]
    if found == ["ok"]:
        return "ok"
    damage = next((f for f in found if row_table(f) is None), None)
    if damage is not None:
        return damage
    version = copy.execute("PRAGMA user_version").fetchone()[0]
    rows = bad_row_keys(copy, version, row_findings(found))
    if source is not None and rows != bad_row_keys(source, version, set(rows)):
        return found[0]
    with copy:
        copy.execute(
            "INSERT OR REPLACE INTO settings(key, value) VALUES (?, ?)",
            [CARRIED_SETTING, json.dumps(rows, sort_keys=True)],
        )
    return "ok"


def bad_rows(
    conn: sqlite3.Connection, table: str, version: int, limit: int | None = 5
) -> list[str]:
    """The keys of rows of `table` that break its constraints, found by inserting each row
    into an empty copy of the table as this version makes it (in memory, no triggers, no
    foreign keys): `limit` of them at most (None: every one). Reads the base table only."""
    want = reference_schema(version).get(("table", table))
    if want is None or want[1] is None:
        return []
    probe = sqlite3.connect(":memory:", isolation_level=None)
    try:
        probe.execute(want[1])
        columns = [r[1] for r in probe.execute(f'PRAGMA table_info("{table}")')]
        names = ", ".join(f'"{c}"' for c in columns)
        marks = ", ".join("?" for _ in columns)
        key = "id" if "id" in columns else ("tag" if "tag" in columns else columns[0])
        found: list[str] = []
        for row in conn.execute(f'SELECT {names} FROM "{table}"'):
            try:
                probe.execute(f'INSERT INTO "{table}" ({names}) VALUES ({marks})', row)
            except sqlite3.IntegrityError:
                found.append(str(row[columns.index(key)]))
                if limit is not None and len(found) >= limit:
                    break
            else:
                probe.execute(f'DELETE FROM "{table}"')
        return found
    finally:
        probe.close()


def _same_value(logged: str | None, current: object) -> bool:
    if logged is None or current is None:
        return logged is None and current is None
    if str(current) == logged or (current in (0, 1) and logged == str(bool(current))):
        return True
    try:
        a, b = float(logged), float(current)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return False
    return abs(a - b) <= 1e-9 * max(1.0, abs(a), abs(b))


def history_findings(conn: sqlite3.Connection, limit: int = 5) -> list[str]:
    """Register rows whose value differs from the last value their history gives the
    field: a change made past the history (before schema 5, or with its trigger off)."""
    from store.db.schema import REGISTER_FIELDS  # the fields the history covers

    found: list[str] = []
    latest = conn.execute(
        "SELECT tbl, tag, field, new FROM register_log WHERE rowid IN "
        "(SELECT max(rowid) FROM register_log WHERE field <> '*' GROUP BY tbl, tag, field)"
    ).fetchall()
    for table, tag, field, new in latest:
        if field not in REGISTER_FIELDS.get(table, ()):
            continue
        row = conn.execute(f'SELECT "{field}" FROM "{table}" WHERE tag = ?', [tag]).fetchone()
        if row is not None and not _same_value(new, row[0]):
            found.append(
                f"{table} {tag}: {field} is {row[0]!r} but its history last gives {new!r} "
                "(changed outside sumpbook)"
            )
            if len(found) >= limit:
                break
    return found
