"""Issue 20, item 3: listings, status, export and rebuild skip an entry row they cannot read
(values of the wrong type, stored past the file's checks) and name it, voided or not."""

from __future__ import annotations

import shutil
import sqlite3

import pytest

from tui.cli import main

BAD = {
    "00000000-0000-4000-8000-0000000000a1": ("reading", "temp_c", "'hot'"),
    "00000000-0000-4000-8000-0000000000a2": ("reading", "note", "x'00ff'"),
    "00000000-0000-4000-8000-0000000000a3": ("reading", "indicator", "5"),
}


@pytest.fixture
def live(demo_file, tmp_path):
    path = tmp_path / "b.db"
    shutil.copy(demo_file, path)
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")
    row = conn.execute(
        "SELECT filter, unit FROM entries WHERE kind = 'reading' AND dp_bar IS NOT NULL LIMIT 1"
    ).fetchone()
    for entry_id, (kind, column, value) in BAD.items():
        values = {"dp_bar": "1.0", "note": "''", column: value}
        conn.execute(
            f"INSERT INTO entries (id, at_utc, logged_utc, kind, by, filter, unit, dp_bar, "
            f"note, {column}) VALUES ('{entry_id}', '2026-11-20T08:00:00Z', "
            f"'2026-11-20T08:00:00Z', '{kind}', 'AK', ?, ?, {values['dp_bar']}, "
            f"{values['note']}, {value})"
            if column not in ("note",)
            else f"INSERT INTO entries (id, at_utc, logged_utc, kind, by, filter, unit, dp_bar, "
            f"note) VALUES ('{entry_id}', '2026-11-20T08:00:00Z', '2026-11-20T08:00:00Z', "
            f"'{kind}', 'AK', ?, ?, 1.0, {value})",
            list(row),
        )
    conn.close()
    return path


def test_readers_skip_and_name_rows_of_the_wrong_type(live, capsys):
    for args in (
        ["list", "entries", "--limit", "5000"],
        ["status"],
        ["export", "--from", "2026-11-01T00:00"],
        ["rebuild"],
    ):
        code = main(["--db", str(live), *args])
        out, err = capsys.readouterr()
        assert code == 0, (args, err)
        assert "unexpected" not in err
        if args[0] in ("list", "export"):
            for entry_id in BAD:
                assert entry_id[:8] in err, (args, err)
