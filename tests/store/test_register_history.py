"""Issue 20, case 10: the register history is kept by the file (schema 5 triggers) and
cannot be edited or emptied; `check` notices a register changed past its history."""

from __future__ import annotations

import sqlite3

import pytest

from store.base.errors import BookError, NotALogbook
from store.db import schema
from store.db.book import full_check, open_book
from store.db.schema import OUTSIDE
from store.ledger import register
from store.ledger.register import FilterPosition


def _raw(path):
    return sqlite3.connect(path, isolation_level=None)


def _history(path, field):
    conn = _raw(path)
    try:
        return conn.execute(
            "SELECT by, old, new FROM register_log WHERE tag = 'P1-RF' AND field = ? "
            "ORDER BY rowid",
            [field],
        ).fetchall()
    finally:
        conn.close()


def test_case10_a_plain_sql_change_leaves_its_history_line(book):
    path = book.path
    book.close()
    conn = _raw(path)
    conn.execute("UPDATE filters SET limit_bar = 2.9 WHERE tag = 'P1-RF'")
    conn.close()
    assert _history(path, "limit_bar") == [(OUTSIDE, "2.5", "2.9")]
    full_check(path)  # the history agrees with the register


def test_case10_the_history_cannot_be_edited_emptied_or_replaced(book):
    path = book.path
    book.close()
    conn = _raw(path)
    try:
        for sql in (
            "DELETE FROM register_log",
            "UPDATE register_log SET new = 'x'",
            "INSERT OR REPLACE INTO register_log SELECT * FROM register_log LIMIT 1",
        ):
            with pytest.raises(sqlite3.IntegrityError, match="history"):
                conn.execute(sql)
        assert conn.execute("SELECT count(*) FROM register_log").fetchone()[0] > 0
    finally:
        conn.close()


def test_a_change_through_sumpbook_is_logged_once_with_who_and_when(book):
    register.update(book, FilterPosition, "P1-RF", {"limit_bar": 2.8}, by="AB")
    rows = book.conn.execute(
        "SELECT by, old, new, at_utc FROM register_log WHERE field = 'limit_bar'"
    ).fetchall()
    assert [r[:3] for r in rows] == [("AB", "2.5", "2.8")]
    assert book.conn.execute("SELECT count(*) FROM register_editor").fetchone()[0] == 0


def test_case10_check_finds_a_change_made_with_the_trigger_off(book):
    # found where the field has a history line to hold it to (an added record logs no values)
    register.update(book, FilterPosition, "P1-RF", {"limit_bar": 2.8}, by="AB")
    path = book.path
    book.close()
    conn = _raw(path)
    sql = conn.execute("SELECT sql FROM sqlite_master WHERE name = 'filters_history'").fetchone()[0]
    conn.execute("DROP TRIGGER filters_history")
    conn.execute("UPDATE filters SET limit_bar = 3.1 WHERE tag = 'P1-RF'")
    conn.execute(sql)  # put back as it was: the schema looks untouched
    conn.close()
    with pytest.raises(NotALogbook, match="limit_bar"):
        full_check(path)


def test_case10_check_finds_an_edited_entry_trigger(book):
    path = book.path
    book.close()
    conn = _raw(path)
    conn.execute("DROP TRIGGER entries_no_delete")
    conn.execute(
        "CREATE TRIGGER entries_no_delete BEFORE DELETE ON entries WHEN 0 "
        "BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END"
    )
    conn.close()
    with pytest.raises(NotALogbook, match="entries_no_delete"):
        full_check(path)
    with open_book(path) as again, pytest.raises(BookError):
        register.update(again, FilterPosition, "P1-RF", {"limit_bar": 2.7}, by="AB")


def test_a_version_4_book_is_upgraded_and_keeps_its_history(tmp_path):
    path = tmp_path / "v4.db"
    conn = _raw(path)
    conn.executescript("\n".join(schema.MIGRATIONS[:4]))
    conn.execute(f"PRAGMA application_id = {schema.APPLICATION_ID}")
    conn.execute("PRAGMA user_version = 4")
    conn.execute("INSERT INTO technicians (tag) VALUES ('AB')")
    conn.execute(
        "INSERT INTO register_log (id, at_utc, by, tbl, tag, field, old, new) VALUES "
        "('00000000-0000-4000-8000-000000000000', '2026-01-01T00:00:00Z', 'AB', "
        "'technicians', 'AB', '*', NULL, 'added')"
    )
    conn.close()
    with open_book(path) as book:
        assert book.conn.execute("PRAGMA user_version").fetchone()[0] == len(schema.MIGRATIONS)
        assert book.conn.execute("SELECT count(*) FROM register_log").fetchone()[0] == 1
    full_check(path)
