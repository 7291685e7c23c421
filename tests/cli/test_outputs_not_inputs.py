"""Issue 20, case 2: an export or a backup never lands on the logbook, its companion files,
its backups or any other SQLite file."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

from tests.kit.plant import run_cli as run
from tui.cli import main


def _targets(live: Path, tmp_path: Path) -> list[Path]:
    assert main(["--db", str(live), "backup", str(tmp_path / "kept.db")]) == 0
    other = tmp_path / "other.sqlite"
    conn = sqlite3.connect(other)
    conn.execute("CREATE TABLE t (a)")
    conn.commit()
    conn.close()
    backups = tmp_path / "b-backups"
    backups.mkdir(exist_ok=True)
    shutil.copy(tmp_path / "kept.db", backups / "b-20260101T000000000000Z-on-close.db")
    return [
        live,
        Path(f"{live}-wal"),
        Path(f"{live}-journal"),
        Path(f"{live}-shm"),
        Path(f"{live}.checked"),  # the check note (store/db/checknote.py)
        tmp_path / "kept.db",
        backups / "b-20260101T000000000000Z-on-close.db",
        other,
    ]


def test_case2_export_refuses_every_input_as_its_output(capsys, live, tmp_path):
    targets = _targets(live, tmp_path)
    capsys.readouterr()
    for target in targets:
        before = target.read_bytes() if target.exists() else None
        live_before = live.read_bytes()
        code, _, err = run(
            capsys, "--db", str(live), "export", "--from", "2020-01-01T00:00", "-o", str(target)
        )
        assert code == 2, target
        assert "nothing was written" in err
        assert (target.read_bytes() if target.exists() else None) == before
        assert live.read_bytes() == live_before
    assert run(capsys, "--db", str(live), "status")[0] == 0
    # a plain new file is still fine
    out = tmp_path / "shift.csv"
    code, _, _ = run(
        capsys, "--db", str(live), "export", "--from", "2020-01-01T00:00", "-o", str(out)
    )
    assert code == 0 and out.read_bytes().startswith(b"\xef\xbb\xbf")


def test_backup_refuses_the_logbooks_own_files(capsys, live, tmp_path):
    targets = _targets(live, tmp_path)
    capsys.readouterr()
    for target in targets:
        code, _, err = run(capsys, "--db", str(live), "backup", str(target))
        assert code == 2, target
        # a -journal made beside the book would be taken by SQLite for a hot journal
        assert not Path(f"{live}-journal").exists()
    assert run(capsys, "--db", str(live), "check")[0] == 0
