"""`sumpbook round`: the round printed, as CSV, and a skip recorded (or refused)."""

from __future__ import annotations

import csv
import io
import shutil
from datetime import timedelta

import pytest

from store import rounds
from store.db.book import open_book
from store.ledger.journal import read
from tui.cli import main


@pytest.fixture
def demo_copy(demo_file, tmp_path, monkeypatch):
    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())
    return path


def test_round_on_the_command_line(demo_copy, capsys):
    assert main(["--db", str(demo_copy), "round", "--next"]) == 0
    out = capsys.readouterr().out
    assert "Round, shift" in out
    assert main(["--db", str(demo_copy), "round", "--next", "--csv"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "order,unit,filter,kind,read,why,read_by,percent_of_limit,value"
    first = next(csv.DictReader(io.StringIO("\n".join(lines))))
    # a skip with its reason, then the same without one: refused, nothing written
    assert main(["--db", str(demo_copy), "round", "--skip", first["filter"]]) == 2
    assert "--why" in capsys.readouterr().err
    with open_book(demo_copy, create=False) as book:
        notes_before = len(read(book, kinds=["note"]))
        span = rounds.plan_round(book).span
    code = main(["--db", str(demo_copy), "round", "--skip", "NOPE-1", "--why", "no access"])
    assert code == 2 and "not on this shift's round" in capsys.readouterr().err
    with open_book(demo_copy, create=False) as book:
        assert len(read(book, kinds=["note"])) == notes_before
        this_shift = rounds.plan_round(book).stops
    assert this_shift  # the demo's M1-R: flagged, not read for its interval
    tag = this_shift[0].filter
    assert (
        main(["--db", str(demo_copy), "round", "--skip", tag, "--why", "no access", "--by", "AK"])
        == 0
    )
    with open_book(demo_copy, create=False) as book:
        assert rounds.skipped_in(book, span) == {tag.upper(): "no access"}
        assert span.end - span.start <= timedelta(hours=24)
