"""The logbook file: creation, migrations, refusal of foreign or newer files, the schema."""

import sqlite3
import subprocess
import sys

import pytest

from store import record
from store.base.errors import BookError, NotALogbook, TooNew
from store.db import schema
from store.db.book import open_book


def test_new_book_has_the_documented_tables_and_settings(tmp_path):
    with open_book(tmp_path / "b.db") as book:
        names = {r[0] for r in book.conn.execute("SELECT name FROM sqlite_master")}
        assert {"units", "fluids", "filters", "breathers", "technicians", "entries"} <= names
        pragma = lambda p: book.conn.execute(f"PRAGMA {p}").fetchone()[0]  # noqa: E731
        assert pragma("journal_mode") == "wal"
        assert pragma("foreign_keys") == 1
        assert pragma("synchronous") == 2  # FULL
        assert pragma("busy_timeout") > 0
        assert pragma("user_version") == schema.SCHEMA_VERSION
        assert pragma("application_id") == schema.APPLICATION_ID
        for table in ("units", "fluids", "filters", "breathers", "technicians"):
            cols = [r[1] for r in book.conn.execute(f"PRAGMA table_info({table})")]
            assert "tag" in cols


def test_a_newer_book_is_refused_and_left_alone(tmp_path):
    path = tmp_path / "b.db"
    open_book(path).close()
    conn = sqlite3.connect(path)
    conn.execute(f"PRAGMA user_version = {schema.SCHEMA_VERSION + 1}")
    conn.commit()
    conn.close()
    before = path.read_bytes()
    with pytest.raises(TooNew, match="newer sumpbook"):
        open_book(path)
    assert path.read_bytes() == before


def test_a_foreign_sqlite_file_is_refused(tmp_path):
    path = tmp_path / "other.db"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE t (x)")
    conn.commit()
    conn.close()
    with pytest.raises(NotALogbook, match="not a sumpbook logbook"):
        open_book(path)


def test_a_text_file_is_refused(tmp_path):
    path = tmp_path / "notes.db"
    path.write_text("this is not a database at all, just words " * 200)
    with pytest.raises(NotALogbook):
        open_book(path)
    assert path.read_text().startswith("this is not a database")


def test_a_failed_migration_changes_nothing(tmp_path, monkeypatch):
    path = tmp_path / "b.db"
    open_book(path).close()
    original = schema.SCHEMA_VERSION
    broken = schema.MIGRATIONS + ["CREATE TABLE extra (x); SELECT no_such_function();"]
    monkeypatch.setattr("store.db.book.MIGRATIONS", broken)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(broken))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(broken))
    monkeypatch.setattr("store.db.schema.SCHEMA_VERSION", len(broken))
    with pytest.raises(BookError, match="left as it was"):
        open_book(path)
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == original
    assert not conn.execute("SELECT 1 FROM sqlite_master WHERE name = 'extra'").fetchone()


def test_migration_to_a_new_step_keeps_entries(tmp_path, monkeypatch, book):
    from store.ledger.entries import Note

    record.log(book, Note(unit="P1", note="before upgrade", by="AB"))
    book.close()
    steps = schema.MIGRATIONS + ["ALTER TABLE units ADD COLUMN colour TEXT;"]
    monkeypatch.setattr("store.db.book.MIGRATIONS", steps)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(steps))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(steps))
    with open_book(tmp_path / "book.db") as again:
        assert again.conn.execute("PRAGMA user_version").fetchone()[0] == len(steps)
        assert [r[0] for r in again.conn.execute("SELECT note FROM entries")] == ["before upgrade"]


def test_entries_cannot_be_edited_or_deleted_even_with_plain_sql(book):
    from store.ledger.entries import Note

    record.log(book, Note(unit="P1", note="x", by="AB"))
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        book.conn.execute("UPDATE entries SET note = 'y'")
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        book.conn.execute("DELETE FROM entries")


def test_store_never_imports_the_ui():
    # house rule: store/ is importable without Textual or Rich
    code = (
        "import importlib, pkgutil, sys, store\n"
        "for m in pkgutil.walk_packages(store.__path__, 'store.'):\n"
        "    importlib.import_module(m.name)\n"
        "assert 'store.exchange.merge' in sys.modules, 'the walk missed the sub-packages'\n"
        "bad = [n for n in ('textual', 'rich') if n in sys.modules]\n"
        "sys.exit(1 if bad else 0)\n"
    )
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0


def test_a_book_opened_read_only_reads_and_refuses_every_write(book):
    # What a forked child process opens: it must never write (SQLite's locks do not carry
    # across a fork), so a save fails with one line and the file is left as it was.
    from store.ledger.entries import Note

    path = book.path
    before = book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    with open_book(path, create=False, readonly=True) as reader:
        assert reader.readonly
        assert reader.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == before
        with pytest.raises(BookError):
            record.log(reader, Note(unit="P1", note="from a child", by="AB"))
    assert book.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == before
    with pytest.raises(BookError, match="no logbook"):
        open_book(path.with_name("none.db"), readonly=True)  # nothing is created either
    assert not path.with_name("none.db").exists()
