"""Issue 20, cases 1, 3, 4, 5 and 11: the live logbook is only ever replaced by a file proven
good (restore, demo over a book, upgrade), and `check` verifies the same as a restore."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import pytest

from store.db.backup import copy_to
from store.db.places import backup_dir
from tests.kit.plant import raw_entry_count as _entries
from tests.kit.plant import run_cli as run


def _backup(live: Path, tmp_path: Path, name: str = "c.db") -> Path:
    conn = sqlite3.connect(live)
    try:
        return copy_to(conn, tmp_path / name)
    finally:
        conn.close()


def _edit(path: Path, *sql: str) -> None:
    conn = sqlite3.connect(path, isolation_level=None)
    try:
        conn.execute("PRAGMA ignore_check_constraints = ON")
        for statement in sql:
            conn.execute(statement)
    finally:
        conn.close()


def _flip(path: Path, offset: int) -> None:
    data = bytearray(path.read_bytes())
    data[offset] ^= 0xFF
    path.write_bytes(bytes(data))


def _refused_and_untouched(capsys, live: Path, source: Path, *words: str) -> str:
    before = live.read_bytes()
    code, out, err = run(capsys, "--db", str(live), "restore", str(source))
    assert code == 2, out
    assert "was left as it was" in err
    for word in words:
        assert word in err
    assert live.read_bytes() == before
    assert not list(live.parent.glob("*.incoming*"))
    return err


def test_case1_an_empty_file_is_refused_and_the_book_stays(capsys, live, tmp_path):
    empty = tmp_path / "t.db"
    empty.write_bytes(b"\n")  # what `echo > t.db` writes
    count = _entries(live)
    _refused_and_untouched(capsys, live, empty, "not an SQLite file")
    assert _entries(live) == count
    assert run(capsys, "--db", str(live), "check")[0] == 0


def test_case3_a_flipped_last_byte_is_refused_before_anything_is_replaced(capsys, live, tmp_path):
    bad = _backup(live, tmp_path, "bad.db")
    # the last page holds entry rows: the flip breaks a CHECK (or a page) of the copy
    _flip(bad, bad.stat().st_size - 1)
    code, _, _ = run(capsys, "--db", str(live), "log", "note", "after the backup", "--by", "AK")
    assert code == 0
    count = _entries(live)
    _refused_and_untouched(capsys, live, bad)
    assert _entries(live) == count
    assert run(capsys, "--db", str(live), "status")[0] == 0


def test_case4_a_foreign_trigger_is_refused(capsys, live, tmp_path):
    bad = _backup(live, tmp_path, "trig.db")
    _edit(
        bad,
        "DROP TRIGGER entries_no_update",
        "CREATE TRIGGER zz AFTER INSERT ON entries BEGIN SELECT 1; END",
    )
    err = _refused_and_untouched(capsys, live, bad)
    assert "'zz' that sumpbook does not make" in err
    assert "'entries_no_update' is missing" in err


@pytest.mark.parametrize("version", [0, 3])
def test_case5_a_wrong_schema_version_is_refused(capsys, live, tmp_path, version):
    bad = _backup(live, tmp_path, f"v{version}.db")
    _edit(bad, f"PRAGMA user_version = {version}")
    _refused_and_untouched(capsys, live, bad)
    assert run(capsys, "--db", str(live), "status")[0] == 0


def test_case5_a_flipped_byte_60_and_an_empty_book_with_our_id_are_refused(capsys, live, tmp_path):
    flipped = _backup(live, tmp_path, "f60.db")
    _flip(flipped, 60)  # the header's user_version field (SQLite file format, offset 60)
    _refused_and_untouched(capsys, live, flipped)
    bare = tmp_path / "bare.db"
    conn = sqlite3.connect(bare)
    conn.execute("PRAGMA application_id = 1398099280")  # 0x53554D50, "SUMP"
    conn.execute("PRAGMA user_version = 4")
    conn.execute("CREATE TABLE x (a)")
    conn.commit()
    conn.close()
    _refused_and_untouched(capsys, live, bare, "missing")


def test_a_good_backup_restores_and_the_book_is_kept_first(capsys, live, tmp_path):
    good = _backup(live, tmp_path, "good.db")
    assert run(capsys, "--db", str(live), "log", "note", "later", "--by", "AK")[0] == 0
    code, out, _ = run(capsys, "--db", str(live), "restore", str(good))
    assert code == 0 and "kept" in out
    kept = list(backup_dir(live).glob("*before-restore*"))
    assert len(kept) == 1 and _entries(kept[0]) == _entries(live) + 1
    assert run(capsys, "--db", str(live), "check")[0] == 0


def test_case11_restore_into_a_book_in_rollback_mode_does_not_wait(capsys, live, tmp_path):
    # the live book itself a fresh backup copy (rollback-journal mode): it used to wait 10 s
    # on its own lock and then call the book damaged
    fresh = _backup(live, tmp_path, "fresh.db")
    shutil.copy(fresh, live)
    code, out, err = run(capsys, "--db", str(live), "restore", str(fresh))
    assert code == 0, err
    assert list(backup_dir(live).glob("*before-restore*"))


def test_case11_demo_force_keeps_the_book_it_replaces(capsys, live):
    assert run(capsys, "--db", str(live), "log", "note", "mine", "--by", "AK")[0] == 0
    count = _entries(live)
    code, out, _ = run(capsys, "--db", str(live), "demo", "--force")
    assert code == 0 and "kept" in out
    kept = list(backup_dir(live).glob("*before-demo*"))
    assert len(kept) == 1 and _entries(kept[0]) == count


def test_case11_status_on_a_damaged_rollback_mode_file_writes_nothing(capsys, live, tmp_path):
    copy = _backup(live, tmp_path, "copy.db")  # rollback-journal mode, as backups are
    conn = sqlite3.connect(copy)
    root = conn.execute("SELECT rootpage FROM sqlite_master WHERE name = 'units'").fetchone()[0]
    page = conn.execute("PRAGMA page_size").fetchone()[0]
    conn.close()
    data = bytearray(copy.read_bytes())
    data[(root - 1) * page : (root - 1) * page + 64] = b"\xa5" * 64  # a torn b-tree page
    copy.write_bytes(bytes(data))
    before = copy.read_bytes()
    code, _, err = run(capsys, "--db", str(copy), "status")
    assert code == 2 and "damaged" in err
    assert copy.read_bytes() == before


def test_case5_an_upgrade_of_a_book_whose_objects_do_not_match_its_version_is_refused(capsys, live):
    _edit(live, "PRAGMA user_version = 3")  # v4 objects under a v3 label
    before = live.read_bytes()
    code, _, err = run(capsys, "--db", str(live), "status")
    assert code == 2 and "not upgraded" in err
    assert live.read_bytes() == before


def test_case6_check_names_a_row_that_breaks_a_check(capsys, live):
    conn = sqlite3.connect(live, isolation_level=None)
    entry_id = conn.execute(
        "SELECT id FROM entries WHERE kind = 'reading' AND dp_bar IS NOT NULL LIMIT 1"
    ).fetchone()[0]
    conn.close()
    _edit(
        live,
        "DROP TRIGGER entries_no_update",
        f"UPDATE entries SET dp_bar = 'abc' WHERE id = '{entry_id}'",
        "CREATE TRIGGER entries_no_update BEFORE UPDATE ON entries\n"
        "    BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END",
    )
    code, out, err = run(capsys, "--db", str(live), "check")
    assert code == 2 and entry_id in err and "void" in err
    for args in (["list", "entries"], ["status"], ["rebuild"]):
        assert run(capsys, "--db", str(live), *args)[0] == 0, args
    code, _, _ = run(
        capsys, "--db", str(live), "log", "void", entry_id[:8], "--reason", "bad", "--by", "AK"
    )
    assert code == 0
    code, out, _ = run(capsys, "--db", str(live), "check")
    assert code == 0 and "voided" in out
    for args in (["list", "entries"], ["status"], ["rebuild"]):
        assert run(capsys, "--db", str(live), *args)[0] == 0, args


def test_check_finds_a_trigger_made_outside_sumpbook(capsys, live):
    _edit(live, "CREATE TRIGGER zz AFTER INSERT ON entries BEGIN SELECT 1; END")
    code, _, err = run(capsys, "--db", str(live), "check")
    assert code == 2 and "'zz'" in err and "backup" in err


def test_case5_advice_names_the_copy_a_restore_kept(capsys, live, tmp_path):
    good = _backup(live, tmp_path, "good.db")
    assert run(capsys, "--db", str(live), "restore", str(good))[0] == 0
    kept = next(backup_dir(live).glob("*before-restore*"))
    _edit(live, "CREATE TRIGGER zz AFTER INSERT ON entries BEGIN SELECT 1; END")
    code, _, err = run(capsys, "--db", str(live), "check")
    assert code == 2 and kept.name in err and "sumpbook restore" in err


def test_an_upgrade_whose_result_does_not_check_out_leaves_the_file_as_it_was(
    tmp_path, monkeypatch
):
    from store.base.errors import BookError
    from store.db import schema
    from store.db.book import open_book

    path = tmp_path / "old.db"
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript("\n".join(schema.MIGRATIONS))
    conn.execute(f"PRAGMA application_id = {schema.APPLICATION_ID}")
    conn.execute(f"PRAGMA user_version = {schema.SCHEMA_VERSION}")
    conn.execute("INSERT INTO technicians (tag) VALUES ('AB')")
    conn.close()
    before = path.read_bytes()
    # a next step that leaves a row breaking a CHECK (a lower-case tag) behind
    steps = [
        *schema.MIGRATIONS,
        "PRAGMA ignore_check_constraints = ON;\n"
        "INSERT INTO technicians (tag) VALUES ('zz');\n"
        "PRAGMA ignore_check_constraints = OFF;",
    ]
    monkeypatch.setattr("store.db.book.MIGRATIONS", steps)
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", len(steps))
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", len(steps))
    # (the bad values a book held are carried; one the step made is refused by the proof
    # of the upgraded copy against the book before it)
    with pytest.raises(BookError, match="not a sound logbook: CHECK constraint.*left as it was"):
        open_book(path)
    assert path.read_bytes() == before


def test_a_restored_book_stays_in_wal_mode_after_its_last_connection_closes(capsys, live, tmp_path):
    good = _backup(live, tmp_path, "good.db")  # backups are in rollback-journal mode
    assert good.read_bytes()[18] == 1  # SQLite file format: byte 18 is 1 (rollback) or 2 (WAL)
    assert run(capsys, "--db", str(live), "restore", str(good))[0] == 0
    assert not Path(f"{live}-wal").exists()
    assert live.read_bytes()[18] == 2
