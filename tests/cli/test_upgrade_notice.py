"""An older book's upgrade reads the whole file several times (about three minutes for five
years of a plant of 800 filters on a 2-core machine, tests/benchmarks/speed-results.md): the
command line and the app say so before it starts, once, and say nothing for a current book."""

from __future__ import annotations

import os
import sqlite3
from pathlib import Path

from store.base.session import from_environ
from tests.kit.plant import run_cli
from tests.kit.schema_steps import drop_tables_after
from tui.app import open_for_app


def schema_8(demo_file: Path, folder: Path) -> Path:
    path = folder / "plant.db"
    path.write_bytes(demo_file.read_bytes())
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript(drop_tables_after(8) + "PRAGMA user_version = 8;")
    conn.close()
    return path


def test_the_command_line_says_before_it_upgrades(demo_file, tmp_path, capsys) -> None:
    path = schema_8(demo_file, tmp_path)
    code, out, err = run_cli(capsys, "--db", str(path), "status", "--json")
    assert code == 0, err
    assert err.count("upgrading") == 1
    assert "from schema 8 to" in err and "Stopping it leaves the book as it was" in err
    assert str(tmp_path / "plant-backups") in err
    assert out.startswith("{")  # the answer itself on stdout, the note apart from it
    code, _, err = run_cli(capsys, "--db", str(path), "status", "--json")
    assert code == 0 and "upgrading" not in err  # upgraded: nothing to say


def test_the_app_says_before_it_takes_the_screen(demo_file, tmp_path, capsys) -> None:
    path = schema_8(demo_file, tmp_path)
    book, demo, _ = open_for_app(path, from_environ(os.environ))
    book.close()
    err = capsys.readouterr().err
    assert not demo and err.startswith("sumpbook: upgrading") and err.count("\n") == 1
    book, _, _ = open_for_app(path, from_environ(os.environ))
    book.close()
    assert capsys.readouterr().err == ""
