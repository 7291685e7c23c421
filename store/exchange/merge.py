"""Merging another laptop's logbook of the same plant into this one (`sumpbook merge`).

Everything is matched by identity, never by position: entries and register-log rows by
their UUID, register rows by tag. The merge only inserts (entries are append-only), runs in
one transaction (all or nothing), and leaves the other file untouched. Merging twice adds
nothing, and A+B holds the same entries as B+A.

What a person must decide is reported, not guessed: a tag registered on both laptops with
different settings, a tag that is a filter here and a breather there, an entry dated more
than a day ahead (a laptop clock set wrong), an entry that points at something the merge
could not bring in, an entry voided on both laptops by different voids.
"""

from __future__ import annotations

import sqlite3
import tempfile
import time
from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from store import record
from store.base import validate
from store.base.errors import BookError
from store.base.timeutil import MAX_AHEAD, format_utc
from store.db.backup import copy_to, side_copy
from store.db.book import Book, open_book
from store.db.proof import prove_file, read_only
from store.db.schema import SCHEMA_VERSION
from store.ledger import journal
from store.ledger.entries import from_row
from store.ledger.register import BOOL_FIELDS, TABLES, WHAT, _check

# In the order foreign keys need them.
REGISTER_TABLES = ("technicians", "fluids", "units", "filters", "breathers")
PLANT_SETTINGS = ("name", "timezone")
# entries column -> the register table it points at
ENTRY_REFERENCES = {
    "by": "technicians",
    "unit": "units",
    "filter": "filters",
    "breather": "breathers",
    "fluid": "fluids",
}
MAX_LINES_PER_REASON = 5
# Rows per INSERT of sqlite-utils' insert_all (it lowers this to stay under SQLite's limit
# of bound values per statement).
BATCH_ROWS = 100
MAX_NAMED_ADDITIONS = 8


@dataclass
class MergeReport:
    """What a merge brought in, and what it left for a person to decide."""

    other: Path
    entries_added: int = 0
    entries_known: int = 0
    register_added: list[str] = field(default_factory=list)
    log_added: int = 0
    settings_taken: list[str] = field(default_factory=list)
    entries_left_out: int = 0
    conflicts: list[str] = field(default_factory=list)

    def summary(self) -> str:
        parts = [
            f"merged {self.other}: {self.entries_added} entries added"
            f" ({self.entries_known} were here already)"
        ]
        if len(self.register_added) > MAX_NAMED_ADDITIONS:
            counts: dict[str, int] = defaultdict(int)
            for item in self.register_added:
                counts[item.split(" ", 1)[0]] += 1
            parts.append(
                "register: added " + ", ".join(f"{n} × {what}" for what, n in counts.items())
            )
        elif self.register_added:
            parts.append("register: added " + ", ".join(self.register_added))
        if self.log_added:
            parts.append(f"{self.log_added} register changes brought in")
        if self.settings_taken:
            parts.append("plant settings taken: " + ", ".join(self.settings_taken))
        if self.entries_left_out:
            parts.append(f"{self.entries_left_out} entries left out (see the conflicts)")
        if self.conflicts:
            parts.append(f"{len(self.conflicts)} conflicts left for you to decide")
        else:
            parts.append("no conflicts")
        return "; ".join(parts)


@dataclass
class _Snapshot:
    register: dict[str, list[dict[str, Any]]]
    register_log: list[dict[str, Any]]
    shifts: list[tuple[str, str, int]]
    settings: dict[str, str]
    entries: list[dict[str, Any]]


def _rows(conn: sqlite3.Connection, sql: str, params: list[Any] | None = None) -> list[dict]:
    cursor = conn.execute(sql, params or [])
    names = [d[0] for d in cursor.description]
    return [dict(zip(names, row, strict=True)) for row in cursor.fetchall()]


def _read(conn: sqlite3.Connection) -> _Snapshot:
    """Everything the merge needs from the other book, read in one consistent snapshot."""
    conn.execute("BEGIN")
    try:
        register = {t: _rows(conn, f"SELECT * FROM {t} ORDER BY tag") for t in REGISTER_TABLES}
        log = _rows(conn, "SELECT * FROM register_log ORDER BY at_utc, id")
        shifts = [
            (r["name"], r["starts"], r["position"])
            for r in _rows(conn, "SELECT name, starts, position FROM shifts ORDER BY starts")
        ]
        settings = {
            r["key"]: r["value"]
            for r in _rows(
                conn,
                f"SELECT key, value FROM settings WHERE key IN "
                f"({', '.join('?' for _ in PLANT_SETTINGS)})",
                list(PLANT_SETTINGS),
            )
        }
        # Voids after everything else: a void points at an entry that must land first. Entries
        # of the same time and logging second in the order the other book wrote them (its
        # rowid): a book reads same-second entries in the order it wrote them, and this book
        # then reads them as the other does (a ΔP reading typed twice with one time shows
        # the same latest value on both laptops; tests/store/test_merge.py). A sync's pull
        # file holds the server's rows in the order they reached it, the pushing book's.
        entries = _voids_after_their_targets(
            _rows(conn, "SELECT * FROM entries ORDER BY (kind = 'void'), at_utc, logged_utc, rowid")
        )
    finally:
        conn.execute("COMMIT")
    return _Snapshot(register, log, shifts, settings, entries)


def _voids_after_their_targets(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """The rows in their order, except that a void of a void comes after the void it voids
    (the other book may hold them in any order: a file put together by another program)."""
    placed: set[Any] = set()
    waiting: dict[Any, list[dict[str, Any]]] = {}  # voided id -> voids waiting for it
    out: list[dict[str, Any]] = []
    ids = {row["id"] for row in rows}

    def place(row: dict[str, Any]) -> None:
        out.append(row)
        placed.add(row["id"])
        for later in waiting.pop(row["id"], []):
            place(later)

    for row in rows:
        target = row.get("voids")
        if target is not None and target in ids and target not in placed:
            waiting.setdefault(target, []).append(row)
        else:
            place(row)
    for stuck in waiting.values():  # a circle of voids: keep them, merge refuses them later
        out.extend(stuck)
    return out


def _same_path(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and a.samefile(b))
    except OSError:
        return False


def merge(book: Book, other_path: Path) -> MergeReport:
    """Bring every entry and register change of the logbook at `other_path` into `book`."""
    other_path = Path(other_path)
    if _same_path(book.path, other_path):
        raise BookError(f"{other_path} is this logbook itself: choose the other laptop's file")
    if book.readonly:
        raise BookError(f"{book.path} is read-only: nothing can be merged into it")
    notices: list[str] = []
    snapshot = _read_source(other_path, book.path, notices)
    report = MergeReport(other=other_path)
    report.conflicts.extend(f"the other book: {notice}" for notice in notices)
    with book.atomic():
        _Merger(book, snapshot, report).run()
    return report


READ_LIMIT_S = 60.0  # reading the other book (its copy, proven first) stops after this


def _read_source(other_path: Path, book_path: Path, notices: list[str]) -> _Snapshot:
    """The other book, read from a copy made through the backup API (pages only) into a
    temporary folder and proven there (`store.db.proof`: header, application id, known
    version, integrity, schema objects exactly as sumpbook makes them; rows breaking a
    CHECK are let through, each row is checked below). Only its base tables are read, on a
    read-only connection, within READ_LIMIT_S. A file that fails is named as the source:
    nothing was merged, this book is as it was."""
    untouched = f"; nothing was merged, {book_path} was left as it was"
    with tempfile.TemporaryDirectory(prefix="sumpbook-merge-") as folder:
        try:
            side = side_copy(other_path, Path(folder) / "other.db", str(other_path))
            version = prove_file(side, str(other_path), rows_ok=True)
        except BookError as exc:
            raise type(exc)(f"{exc}{untouched}") from exc
        conn = read_only(side)
        deadline = time.monotonic() + READ_LIMIT_S
        conn.set_progress_handler(lambda: time.monotonic() > deadline, 100_000)
        try:
            if version < SCHEMA_VERSION:
                return _read_upgraded(conn, notices)
            return _read(conn)
        except BookError as exc:  # an older book's upgrade of the copy refused it
            raise type(exc)(
                f"{other_path} could not be merged: {str(exc).replace(str(side), 'its copy')}"
                f"{untouched}"
            ) from exc
        except (sqlite3.Error, UnicodeDecodeError, KeyError, TypeError) as exc:
            why = (
                f"reading it took over {READ_LIMIT_S:g} s"
                if time.monotonic() > deadline
                else f"{type(exc).__name__}: {validate.one_line(str(exc), 120)}"
            )
            raise BookError(
                f"{other_path} could not be read as a logbook ({why}){untouched}"
            ) from exc
        finally:
            conn.close()


def _read_upgraded(conn: sqlite3.Connection, notices: list[str]) -> _Snapshot:
    """An older logbook: upgrade a temporary copy (the other file stays as it is); what the
    upgrade could not carry over goes to `notices` (those rows are not merged)."""
    with tempfile.TemporaryDirectory(prefix="sumpbook-merge-") as folder:
        copy = copy_to(conn, Path(folder) / "other.db")
        with open_book(copy, create=False) as upgraded:
            notices.extend(upgraded.notices)
            return _read(upgraded.conn)


class _Merger:
    def __init__(self, book: Book, other: _Snapshot, report: MergeReport) -> None:
        self.book = book
        self.conn = book.conn
        self.db = book.db  # the same connection: its writes land in the merge's transaction
        self.other = other
        self.report = report
        self.conflicting: set[tuple[str, str]] = set()  # (table, TAG) decided by a person
        self.left_out: dict[str, list[str]] = defaultdict(list)  # reason -> entry ids
        self.log_held = 0  # register changes whose text or time could not have been written

    def run(self) -> None:
        for table in REGISTER_TABLES:
            self._register_table(table)
        self._shifts()
        self._settings()
        self._register_log()
        self._entries()
        if self.log_held:
            self.report.conflicts.append(
                f"{self.log_held} register changes not brought in: their time or text could "
                "not have been written by sumpbook"
            )
        for reason, ids in self.left_out.items():
            shown = ", ".join(i[:8] for i in ids[:MAX_LINES_PER_REASON])
            extra = len(ids) - MAX_LINES_PER_REASON
            more = f" and {extra} more" if extra > 0 else ""
            self.report.conflicts.append(
                f"{len(ids)} {'entry' if len(ids) == 1 else 'entries'} left out ({shown}{more}):"
                f" {reason}"
            )
        self.report.entries_left_out = sum(len(ids) for ids in self.left_out.values())

    # ---- register -------------------------------------------------------------------------------

    def _columns(self, table: str) -> list[str]:
        """This book's columns of `table`: another book's rows are written with these only."""
        return list(self.db[table].columns_dict)

    def _here(self, table: str, tag: str) -> dict[str, Any] | None:
        rows = _rows(self.conn, f"SELECT * FROM {table} WHERE tag = ?", [tag])
        return rows[0] if rows else None

    def _register_table(self, table: str) -> None:
        columns = self._columns(table)
        what = WHAT[table]
        cls = {t: c for c, t in TABLES.items()}[table]
        for theirs in self.other.register[table]:
            tag = validate.one_line(str(theirs["tag"]), 20)
            problem = validate.register_row_problem(table, theirs)
            if problem is None:
                problem = self._record_problem(cls, theirs)
            if problem:
                self.conflicting.add((table, tag.upper()))
                self.report.conflicts.append(
                    f"{what} {tag} not brought in: {validate.one_line(problem)}"
                )
                continue
            ours = self._here(table, tag)
            if ours is None:
                clash = self._clash(table, tag)
                if clash:
                    self.conflicting.add((table, tag.upper()))
                    self.report.conflicts.append(
                        f"{what} {tag}: the other book has a {what} {tag}, this one a "
                        f"{WHAT[clash]} {tag}; not brought in"
                    )
                    continue
                refused = self._insert(table, [{c: theirs.get(c) for c in columns}])
                if refused:
                    self.conflicting.add((table, tag.upper()))
                    self.report.conflicts.append(
                        f"{what} {tag} not brought in: this book refuses it "
                        f"({validate.one_line(refused[0][1], 120)})"
                    )
                    continue
                self.report.register_added.append(f"{what} {tag}")
                continue
            differences = [
                f"{c} here {_show(ours.get(c))}, there {_show(theirs.get(c))}"
                for c in columns
                if c != "tag" and not _same_value(ours.get(c), theirs.get(c))
            ]
            if differences:
                self.conflicting.add((table, tag.upper()))
                self.report.conflicts.append(
                    f"{what} {tag} differs: {'; '.join(differences)}; this book's settings"
                    " kept (change them with 'sumpbook register change' if the other is right)"
                )

    def _record_problem(self, cls: type, row: dict[str, Any]) -> str | None:
        """The register's own rules (ranges, limit below bypass, ...) on another book's row."""
        names = set(cls.__dataclass_fields__)
        values = {k: (bool(v) if k in BOOL_FIELDS else v) for k, v in row.items() if k in names}
        try:
            _check(self.book, cls(**values))
        except (BookError, TypeError, ValueError) as exc:
            return str(exc)
        return None

    def _clash(self, table: str, tag: str) -> str | None:
        """Filters and breathers share one tag space."""
        other = {"filters": "breathers", "breathers": "filters"}.get(table)
        if other and self._here(other, tag) is not None:
            return other
        return None

    def _shifts(self) -> None:
        theirs = self.other.shifts
        ours = [
            (r[0], r[1], r[2])
            for r in self.conn.execute(
                "SELECT name, starts, position FROM shifts ORDER BY starts"
            ).fetchall()
        ]
        if not theirs or _pattern(ours) == _pattern(theirs):
            return
        try:
            for name, starts, _ in theirs:
                validate.shift(name, starts)
        except BookError as exc:
            self.report.conflicts.append(f"the other book's shift pattern not taken: {exc}")
            return
        if ours:
            self.conflicting.add(("shifts", "PATTERN"))
            self.report.conflicts.append(
                f"shift pattern differs: here {_pattern_text(ours)}, there {_pattern_text(theirs)};"
                " this book's pattern kept"
            )
            return
        for name, starts, position in theirs:
            self.conn.execute(
                "INSERT INTO shifts(name, starts, position) VALUES (?, ?, ?)",
                [name, starts, position],
            )
        self.report.settings_taken.append(f"shifts {_pattern_text(theirs)}")

    def _settings(self) -> None:
        for key in PLANT_SETTINGS:
            theirs = self.other.settings.get(key)
            if theirs is None:
                continue
            try:
                theirs = validate.plant_setting(key, theirs)
            except BookError as exc:
                self.report.conflicts.append(f"the other book's plant {key} not taken: {exc}")
                continue
            row = self.conn.execute("SELECT value FROM settings WHERE key = ?", [key]).fetchone()
            if row is None:
                self.conn.execute("INSERT INTO settings(key, value) VALUES (?, ?)", [key, theirs])
                self.report.settings_taken.append(f"{key} {theirs}")
            elif row[0] != theirs:
                self.report.conflicts.append(
                    f"plant {key} differs: here '{row[0]}', there '{theirs}'; this book's kept"
                )

    def _register_log(self) -> None:
        columns = self._columns("register_log")
        new: list[dict[str, Any]] = []
        for row in self.other.register_log:
            if (str(row["tbl"]), str(row["tag"]).upper()) in self.conflicting:
                continue  # the change was not made here; the person deciding will log theirs
            if validate.register_log_problem(row):
                self.log_held += 1
                continue
            exists = self.conn.execute(
                "SELECT 1 FROM register_log WHERE id = ?", [row["id"]]
            ).fetchone()
            if exists:
                continue
            new.append({c: row.get(c) for c in columns})
        refused = self._insert("register_log", new)
        self.log_held += len(refused)
        self.report.log_added += len(new) - len(refused)

    def _insert(self, table: str, rows: list[dict[str, Any]]) -> list[tuple[dict[str, Any], str]]:
        """Insert `rows` into `table`; a row the file refuses (a CHECK, a trigger) is held
        back, never the merge: the rows go in batches, and a batch the file refuses is
        undone and tried row by row, each in a savepoint. Returns (row, why) of those held."""
        if not rows:
            return []
        self.conn.execute("SAVEPOINT merge_rows")
        try:
            self.db[table].insert_all(rows, batch_size=BATCH_ROWS)
        except sqlite3.IntegrityError:
            self.conn.execute("ROLLBACK TO merge_rows")
        else:
            self.conn.execute("RELEASE merge_rows")
            return []
        refused: list[tuple[dict[str, Any], str]] = []
        for row in rows:
            self.conn.execute("SAVEPOINT merge_row")
            try:
                self.db[table].insert(row)
            except sqlite3.IntegrityError as exc:
                self.conn.execute("ROLLBACK TO merge_row")
                refused.append((row, str(exc)))
            self.conn.execute("RELEASE merge_row")
        self.conn.execute("RELEASE merge_rows")
        return refused

    # ---- entries --------------------------------------------------------------------------------

    def _entries(self) -> None:
        """Entries other than voids are checked against the register and this book's own
        entries only, so they are written in batches. A void is checked against the entries
        before it (the one it voids may have come in with this merge, even as a void): the
        batch is written first and the void on its own."""
        columns = self._columns("entries")
        latest = format_utc(self.book.now() + MAX_AHEAD)
        pending: list[dict[str, Any]] = []
        touched: dict[tuple[Any, ...], dict[str, Any]] = {}
        for theirs in self.other.entries:
            if theirs.get("voids") is not None and pending:
                self._insert_entries(pending)
                pending = []
            problem = validate.entry_row_problem(theirs)
            if problem:
                self.left_out[f"values no one could have typed here ({problem})"].append(
                    validate.one_line(str(theirs.get("id")), 36)
                )
                continue
            ours = _rows(self.conn, "SELECT * FROM entries WHERE id = ?", [theirs["id"]])
            if ours:
                if all(_same_value(ours[0].get(c), theirs.get(c)) for c in columns):
                    self.report.entries_known += 1
                else:
                    self.report.conflicts.append(
                        f"entry {theirs['id'][:8]} differs between the books; this book's kept"
                    )
                continue
            reason = self._why_not(theirs, latest) or self._refused_here(theirs)
            if reason:
                self.left_out[reason].append(theirs["id"])
                continue
            pending.append({c: theirs.get(c) for c in columns})
            self.report.entries_added += 1
            touched[self._target(theirs)] = theirs
        self._insert_entries(pending)
        self._after_write(touched.values())

    def _insert_entries(self, rows: list[dict[str, Any]]) -> None:
        for row, why in self._insert("entries", rows):
            self.left_out[f"this book refuses them ({validate.one_line(why, 120)})"].append(
                validate.one_line(str(row.get("id")), 36)
            )
            self.report.entries_added -= 1

    def _refused_here(self, row: dict[str, Any]) -> str | None:
        """What the command line would refuse in this entry, given this book's register: the
        same checks (`journal.validate`), the cross-field ones included (a code that does not
        match its counts, counts rising with particle size, a filter filed under another
        unit). A technician marked inactive since is no reason: the entry is history."""
        if row.get("voids") is not None:
            return None  # checked against the entries before it (`_why_not`)
        try:
            entry = from_row(row)
        except (ValueError, TypeError, KeyError, OverflowError) as exc:
            return f"it cannot be read as an entry ({validate.one_line(str(exc), 80)})"
        try:
            checked = journal.validate(self.book, entry, self.book.now() + MAX_AHEAD, history=True)
        except BookError as exc:
            return f"the command line refuses them here ({validate.one_line(str(exc), 120)})"
        unit = row.get("unit")
        if checked.unit and unit and str(unit).upper() != str(checked.unit).upper():
            target = row.get("filter") or row.get("breather")
            return (
                f"filed under unit {validate.one_line(str(unit), 20)}, but {target} is on unit "
                f"{checked.unit} here"
            )
        return None

    def _target(self, entry: dict[str, Any]) -> tuple[Any, ...]:
        """What an entry is about (a void: what the entry it voids is about)."""
        if entry.get("voids"):
            row = _rows(self.conn, "SELECT * FROM entries WHERE id = ?", [entry["voids"]])
            entry = row[0] if row else entry
        return tuple(str(entry.get(c) or "").upper() for c in ("filter", "breather", "unit"))

    def _after_write(self, entries: Iterable[dict[str, Any]]) -> None:
        """Bring the derived rows up to date once per target touched, with its newest merged
        entry: a refresh reads all the entries of its target, so a merge of thousands of
        entries stays quick."""
        record.after_write(self.book, [from_row(row) for row in entries])

    def _why_not(self, entry: dict[str, Any], latest: str) -> str | None:
        """Why an entry of the other book cannot land here (None: it can)."""
        if entry["at_utc"] > latest:
            return (
                f"dated after {latest} (more than a day ahead of this computer's clock; was the "
                "other laptop's clock wrong?): log them again with the right time"
            )
        for column, table in ENTRY_REFERENCES.items():
            tag = entry.get(column)
            if tag and self._here(table, tag) is None:
                return (
                    f"{WHAT[table]} {tag} is not in this book's register: register it (or settle"
                    " the conflict above) and merge again"
                )
        voids = entry.get("voids")
        if voids:
            if not self.conn.execute("SELECT 1 FROM entries WHERE id = ?", [voids]).fetchone():
                return f"they void entry {voids[:8]}, which did not come in: merge again after"
            other_void = self.conn.execute(
                "SELECT id FROM entries WHERE voids = ?", [voids]
            ).fetchone()
            if other_void:
                return (
                    f"entry {voids[:8]} is voided here already (by {other_void[0][:8]}); it stays"
                    " voided"
                )
        return None


def _same_value(a: Any, b: Any) -> bool:
    """Equal as stored: 50 and 50.0 are the same number, but '50' is not a number."""
    return isinstance(a, str) == isinstance(b, str) and a == b


def _show(value: Any) -> str:
    if value is None:
        return "(none)"
    return f"{value:g}" if isinstance(value, float) else validate.one_line(str(value), 60)


def _pattern(rows: list[tuple[str, str, int]]) -> list[tuple[str, str]]:
    return sorted((name.lower(), starts) for name, starts, _ in rows)


def _pattern_text(rows: list[tuple[str, str, int]]) -> str:
    return ", ".join(f"{name} {starts}" for name, starts, _ in sorted(rows, key=lambda r: r[1]))
