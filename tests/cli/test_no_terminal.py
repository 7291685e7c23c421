"""The app started where there is no terminal (a script, a pipe, a scheduled job) says so in
one line and stops, instead of waiting for keys on a closed input with a core busy. Nothing is
opened: no book, no demo copy."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("command", [[], ["app"]])
def test_the_app_without_a_terminal_says_so_and_opens_nothing(tmp_path, command):
    book = tmp_path / "plant.db"
    env = {**os.environ, "PYTHONPATH": str(ROOT), "SUMPBOOK_CONFIG": str(tmp_path / "p.json")}
    env.pop("SUMPBOOK_DB", None)
    done = subprocess.run(
        [sys.executable, "-m", "tui", "--db", str(book), *command],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        env=env,
        timeout=60,  # the app waiting on a closed input would run until killed here
    )
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "needs a terminal" in lines[0], done.stderr
    assert "Traceback" not in done.stderr
    assert done.stdout == ""
    assert not book.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == []
