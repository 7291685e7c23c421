"""Issue 20, case 9: importing the same hand-made CSV (no id column) twice adds nothing."""

from __future__ import annotations

import shutil
import sqlite3

from tui.cli import main


def _count(path) -> int:
    conn = sqlite3.connect(path)
    try:
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    finally:
        conn.close()


def test_case9_a_hand_made_csv_imported_twice_adds_its_entries_once(demo_file, tmp_path, capsys):
    live = tmp_path / "b.db"
    shutil.copy(demo_file, live)
    sheet = tmp_path / "hand.csv"
    sheet.write_text(
        "time,kind,target,by,dp_bar,temp_c,note\n"
        "2026-11-20T08:00:00+01:00,reading,M1-R,AK,1.1,48,\n"
        "2026-11-20T09:00:00+01:00,reading,M1-R,AK,1.2,49,second\n"
        "2026-11-20T10:00:00+01:00,note,,AK,,,a plain note\n",
        encoding="utf-8",
    )
    before = _count(live)
    assert main(["--db", str(live), "import", str(sheet)]) == 0
    assert _count(live) == before + 3
    capsys.readouterr()
    assert main(["--db", str(live), "import", str(sheet)]) == 0
    out = capsys.readouterr().out
    assert _count(live) == before + 3
    assert "imported 0 entries" in out and "3 were in the book already" in out
    # a row changed in any value is a new entry
    sheet.write_text(
        "time,kind,target,by,dp_bar,temp_c,note\n"
        "2026-11-20T08:00:00+01:00,reading,M1-R,AK,1.15,48,\n",
        encoding="utf-8",
    )
    assert main(["--db", str(live), "import", str(sheet)]) == 0
    assert _count(live) == before + 4
