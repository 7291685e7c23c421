"""A book holding a value stored outside sumpbook that breaks its table's CHECK (a hand-made
edit) opens with that entry skipped and noted; an upgrade to this schema carries the entry
as it is (its copies and its proof let through the bad values the book held) instead of
refusing the book. An upgrade that gave a bad value the book did not hold is still refused,
and a damaged file still is.

Backups carry such values too, named in the copy (`proof.CARRIED_SETTING`): entries stay for
good, voided or not, so a strict copy would refuse every backup of the book from then on.
A restore lets through the rows a copy names and no others: a bit flipped in a copy reads
as another bad row or as damage, and is refused (also tests/store/test_proven_files.py).
Common practice, no source."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import pytest

from store.base.errors import BookError, NotALogbook
from store.db import schema
from store.db.backup import copy_to, rolling_backup
from store.db.book import open_book
from store.db.places import backup_dir
from store.db.proof import (
    CARRIED_SETTING,
    MAX_FINDINGS,
    carried_rows,
    carry_bad_rows,
    prove_file,
)
from store.ledger import journal
from tests.kit.plant import run_cli
from tests.kit.schema_steps import drop_tables_after


def with_bad_value(path: Path, entry_id: str) -> None:
    """An entry whose ΔP is a text, written past the table's CHECK (as a hand edit would)."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")
    cols = [r[1] for r in conn.execute("PRAGMA table_info(entries)")]
    row = dict(
        zip(
            cols,
            conn.execute("SELECT * FROM entries WHERE kind = 'reading' LIMIT 1").fetchone(),
            strict=True,
        )
    )
    row.update(id=entry_id, dp_bar="not a number")
    marks = ", ".join("?" for _ in row)
    conn.execute(f"INSERT INTO entries ({', '.join(row)}) VALUES ({marks})", list(row.values()))
    conn.close()


def schema_7(path: Path) -> None:
    """The book as schema 7 left it (the tables the steps since added, dropped)."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript(drop_tables_after(7) + "PRAGMA user_version = 7;")
    conn.close()


@pytest.fixture
def bad(demo_file: Path, tmp_path: Path) -> Path:
    path = tmp_path / "book.db"
    shutil.copy(demo_file, path)
    with_bad_value(path, "bad-00000001")
    return path


def skipped(path: Path) -> list[str]:
    with open_book(path, create=False) as book:
        assert book.conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION
        ids = {e.id for e in journal.read(book)}
        held = book.conn.execute("SELECT id FROM entries WHERE id LIKE 'bad-%'").fetchall()
    return sorted(i for (i,) in held if i not in ids)


def test_a_book_holding_a_bad_value_upgrades_carrying_it(bad):
    schema_7(bad)
    assert skipped(bad) == ["bad-00000001"]  # opened: upgraded, the entry left out as before


def test_an_upgrade_that_gave_a_new_bad_value_is_refused(bad, tmp_path):
    upgraded = tmp_path / "upgraded.db"
    shutil.copy(bad, upgraded)
    label = "the upgraded copy"
    assert prove_file(upgraded, label, held=bad) == schema.SCHEMA_VERSION  # the same one
    with_bad_value(upgraded, "bad-00000002")  # one the book before did not hold
    with pytest.raises(NotALogbook, match="CHECK constraint failed in entries"):
        prove_file(upgraded, label, held=bad)
    with pytest.raises(NotALogbook):
        prove_file(upgraded, label)  # without the book before: no row finding goes


def test_a_damaged_book_is_not_upgraded(bad, tmp_path):
    # A page of the entries table overwritten: damage, not a bad value.
    schema_7(bad)
    before = bad.read_bytes()
    conn = sqlite3.connect(bad)
    page = conn.execute("PRAGMA page_size").fetchone()[0]
    root = conn.execute("SELECT rootpage FROM sqlite_master WHERE name = 'entries'").fetchone()[0]
    conn.close()
    with bad.open("r+b") as f:
        f.seek((root - 1) * page + 8)
        f.write(b"\xff" * 64)
    damaged = bad.read_bytes()
    assert damaged != before
    with pytest.raises(BookError):
        open_book(bad, create=False).close()
    assert bad.read_bytes() == damaged  # left as it was


def carried(path: Path) -> dict[str, list[str]] | None:
    conn = sqlite3.connect(path)
    try:
        return carried_rows(conn)
    finally:
        conn.close()


def test_a_backup_carries_the_bad_values_the_book_holds_and_names_them(bad, tmp_path):
    before = bad.read_bytes()
    with open_book(bad, create=False) as book:
        copy = copy_to(book.conn, tmp_path / "backup.db")
    assert carried(copy) == {"entries": ["bad-00000001"]}
    assert carried(bad) is None  # nothing written into the book itself
    assert bad.read_bytes() == before
    shutil.copy(copy, tmp_path / "opened.db")
    assert skipped(tmp_path / "opened.db") == ["bad-00000001"]  # the copy reads as the book


def test_a_copy_with_a_bad_value_the_book_does_not_hold_is_refused(bad, tmp_path):
    with open_book(bad, create=False) as book:
        copy = copy_to(book.conn, tmp_path / "backup.db")
        with_bad_value(copy, "bad-00000002")  # as a flipped bit could read
        conn = sqlite3.connect(copy)
        try:
            assert carry_bad_rows(conn, book.conn).startswith("CHECK constraint failed")
            assert carry_bad_rows(conn, None) == "ok"  # the book's bytes: taken as they are
        finally:
            conn.close()


def test_a_voided_bad_entry_does_not_stop_the_backups(demo_file, tmp_path, capsys):
    # the way out `sumpbook check` names: void it; the row stays, so must the backups
    book_path, bad_id = tmp_path / "book.db", "0badc0de-0000-4000-8000-000000000001"
    shutil.copy(demo_file, book_path)
    with_bad_value(book_path, bad_id)
    code, _, err = run_cli(
        capsys, "--db", str(book_path), "log", "void", bad_id, "--reason", "hand edit",
        "--by", "AK",
    )  # fmt: skip
    assert code == 0, err
    code, out, err = run_cli(capsys, "--db", str(book_path), "check")
    assert code == 0 and f"entry {bad_id} breaks a check of the book; it is voided" in out
    one = tmp_path / "one.db"
    code, out, err = run_cli(capsys, "--db", str(book_path), "backup", str(one))
    assert code == 0, err
    assert carried(one) == {"entries": [bad_id]}
    # said, not only written into the copy
    assert (
        f"it carries 1 row breaking the book's checks, as the book holds them (entries row {bad_id})"
        in out + err
    )
    with open_book(book_path, create=False) as book:
        kept = rolling_backup(book.conn, book_path, "on-close")
    assert carried(kept) == {"entries": [bad_id]}


def test_the_backup_restores_with_its_bad_values_even_with_the_book_gone(bad, tmp_path, capsys):
    with open_book(bad, create=False) as book:
        copy = copy_to(book.conn, tmp_path / "backup.db")
    lost = tmp_path / "lost.db"  # the book gone: what a backup is for
    code, out, err = run_cli(capsys, "--db", str(lost), "restore", str(copy))
    assert code == 0, err
    assert skipped(lost) == ["bad-00000001"]
    code, out, err = run_cli(capsys, "--db", str(bad), "restore", str(copy))  # over the book
    assert code == 0, err
    assert skipped(bad) == ["bad-00000001"]
    kept = sorted(backup_dir(bad).glob("*before-restore*.db"))
    assert len(kept) == 1 and carried(kept[0]) == {"entries": ["bad-00000001"]}


def test_a_restore_refuses_a_carried_copy_with_another_bad_value_or_damage(bad, tmp_path, capsys):
    with open_book(bad, create=False) as book:
        copy = copy_to(book.conn, tmp_path / "backup.db")
    other = tmp_path / "other.db"
    shutil.copy(copy, other)
    with_bad_value(other, "bad-00000002")  # a row the copy does not name
    renamed = tmp_path / "renamed.db"
    shutil.copy(copy, renamed)
    conn = sqlite3.connect(renamed)
    conn.execute(  # the name changed (a flipped bit in the setting): no row is named
        "UPDATE settings SET value = ? WHERE key = ?",
        ['{"entries": ["bad-00000003"]}', CARRIED_SETTING],
    )
    conn.commit()
    conn.close()
    for refused in (other, renamed):
        before = bad.read_bytes()
        code, _, err = run_cli(capsys, "--db", str(bad), "restore", str(refused))
        assert code == 2, err
        assert "CHECK constraint failed in entries" in err and "was left as it was" in err
        assert bad.read_bytes() == before


def test_the_upgrades_kept_copy_names_the_bad_values_and_restores(bad, tmp_path, capsys):
    schema_7(bad)
    assert skipped(bad) == ["bad-00000001"]  # upgraded
    kept = sorted(backup_dir(bad).glob("*before-v7-upgrade*.db"))
    assert len(kept) == 1 and carried(kept[0]) == {"entries": ["bad-00000001"]}
    back = tmp_path / "back.db"
    code, _, err = run_cli(capsys, "--db", str(back), "restore", str(kept[0]))
    assert code == 0, err
    assert skipped(back) == ["bad-00000001"]  # schema 7 again, upgraded as it opens


def with_index_astray(path: Path) -> None:
    """A new entry whose index entry (entries_by_time) is filed under another time: damage
    that SQLite's integrity check reports as a row missing from the index, after the rows
    before it (as a bit flipped in an index page could read)."""

    def index_on(column: str) -> None:
        conn = sqlite3.connect(path, isolation_level=None)
        version = conn.execute("PRAGMA schema_version").fetchone()[0]
        conn.execute("PRAGMA writable_schema = ON")
        conn.execute(
            "UPDATE sqlite_master SET sql = ? WHERE name = 'entries_by_time'",
            [f"CREATE INDEX entries_by_time ON entries({column})"],
        )
        conn.execute(f"PRAGMA schema_version = {version + 1}")
        conn.close()

    index_on("logged_utc")
    conn = sqlite3.connect(path, isolation_level=None)
    cols = [r[1] for r in conn.execute("PRAGMA table_info(entries)")]
    row = dict(
        zip(cols, conn.execute("SELECT * FROM entries WHERE kind = 'note'").fetchone(), strict=True)
    )
    row["id"] = "0badc0de-0000-4000-8000-0000000000ff"
    row["logged_utc"] = conn.execute("SELECT max(at_utc) FROM entries").fetchone()[0]
    marks = ", ".join("?" for _ in row)
    conn.execute(f"INSERT INTO entries ({', '.join(row)}) VALUES ({marks})", list(row.values()))
    conn.close()
    index_on("at_utc")  # the schema as sumpbook makes it again


def test_damage_listed_after_many_carried_rows_is_still_refused(bad, tmp_path, capsys):
    # The proof's check lists MAX_FINDINGS findings; with that many bad rows ahead of it,
    # the damage shows only in the check run again in full.
    for i in range(2, MAX_FINDINGS + 2):
        with_bad_value(bad, f"bad-{i:08d}")
    with open_book(bad, create=False) as book:
        copy = copy_to(book.conn, tmp_path / "backup.db")
    assert len(carried(copy)["entries"]) == MAX_FINDINGS + 1
    with_index_astray(copy)
    before = bad.read_bytes()
    code, _, err = run_cli(capsys, "--db", str(bad), "restore", str(copy))
    assert code == 2, err
    assert "missing from index entries_by_time" in err
    assert bad.read_bytes() == before


def test_an_entry_with_an_id_sumpbook_does_not_make_is_refused_a_void_in_words(bad, capsys):
    # the schema's CHECK on `voids` takes only the ids the book writes: say so, not its SQL
    before = bad.read_bytes()
    code, _, err = run_cli(
        capsys, "--db", str(bad), "log", "void", "bad-00000001", "--reason", "hand edit",
        "--by", "AK",
    )  # fmt: skip
    assert code == 2
    assert "has an id sumpbook does not make" in err and "GLOB" not in err
    assert "Traceback" not in err
    assert bad.read_bytes() == before


def with_null_note(path: Path, entry_id: str) -> None:
    """An entry with no note at all (NULL where the table says NOT NULL), written while the
    table's definition was loosened by hand and then put back: SQLite's check words it
    "NULL value in entries.note", not as a constraint that failed."""

    def table_sql(old: str, new: str) -> None:
        conn = sqlite3.connect(path, isolation_level=None)
        version = conn.execute("PRAGMA schema_version").fetchone()[0]
        conn.execute("PRAGMA writable_schema = ON")
        conn.execute(
            "UPDATE sqlite_master SET sql = replace(sql, ?, ?) WHERE name = 'entries'", [old, new]
        )
        conn.execute(f"PRAGMA schema_version = {version + 1}")
        conn.close()

    strict, loose = "note TEXT NOT NULL DEFAULT ''", "note TEXT          DEFAULT ''"
    table_sql(strict, loose)
    conn = sqlite3.connect(path, isolation_level=None)
    cols = [r[1] for r in conn.execute("PRAGMA table_info(entries)")]
    row = dict(
        zip(cols, conn.execute("SELECT * FROM entries WHERE kind = 'note'").fetchone(), strict=True)
    )
    row.update(id=entry_id, note=None)
    marks = ", ".join("?" for _ in row)
    conn.execute(f"INSERT INTO entries ({', '.join(row)}) VALUES ({marks})", list(row.values()))
    conn.close()
    table_sql(loose, strict)


def test_a_null_where_a_value_belongs_is_a_bad_value_not_damage(demo_file, tmp_path, capsys):
    book_path, null_id = tmp_path / "book.db", "0badc0de-0000-4000-8000-00000000000e"
    shutil.copy(demo_file, book_path)
    with_null_note(book_path, null_id)
    code, _, err = run_cli(capsys, "--db", str(book_path), "check")
    assert code == 2 and f"entries row {null_id}" in err and "damaged" not in err
    copy = tmp_path / "copy.db"
    code, _, err = run_cli(capsys, "--db", str(book_path), "backup", str(copy))
    assert code == 0, err
    assert carried(copy) == {"entries": [null_id]}
    code, _, err = run_cli(capsys, "--db", str(tmp_path / "back.db"), "restore", str(copy))
    assert code == 0, err


def test_check_reads_past_many_bad_rows_to_the_damage(bad, capsys):
    for i in range(2, MAX_FINDINGS + 2):
        with_bad_value(bad, f"bad-{i:08d}")
    with_index_astray(bad)
    code, _, err = run_cli(capsys, "--db", str(bad), "check")
    assert code == 2
    assert "damaged" in err and "missing from index entries_by_time" in err


def test_check_says_which_rows_a_void_can_take_and_which_need_a_backup(bad, capsys):
    # `bad-00000001` has an id sumpbook does not make: no void can name it (the void refuses
    # it in words, above), so `check` must not send the technician there
    code, _, err = run_cli(capsys, "--db", str(bad), "check")
    assert code == 2 and "entries row bad-00000001" in err
    assert "no void can name them" in err and "void them with" not in err
    mine = "0badc0de-0000-4000-8000-000000000001"  # the form sumpbook writes
    with_bad_value(bad, mine)
    code, _, err = run_cli(capsys, "--db", str(bad), "check")
    assert f"void entries row {mine} with 'sumpbook log void ID" in err
    assert "no void can name the others" in err
    code, out, err = run_cli(
        capsys, "--db", str(bad), "log", "void", mine[:13], "--reason", "hand edit", "--by", "AK"
    )
    assert code == 0, err


def test_an_entry_that_cannot_be_read_names_the_way_out_it_can_take(bad):
    with open_book(bad, create=False) as book:
        with pytest.raises(BookError, match="no void can name it") as found:
            journal.find_entry(book, "bad-00000001")
        assert "void it with" not in str(found.value)
    mine = "0badc0de-0000-4000-8000-000000000001"  # the form sumpbook writes
    assert journal.way_out([mine]) == "void it with 'sumpbook log void ID --reason ...'"
    assert "void those whose ids sumpbook made" in journal.way_out([mine, "bad-00000001"])
