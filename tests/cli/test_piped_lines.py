"""Piped output is never wrapped: a message naming a long path stays one line, whatever the
length of the temporary folder the tests run in."""

from __future__ import annotations

from store import record
from store.db.backup import copy_to
from store.ledger.entries import Note
from tui.cli import main


def test_a_restore_message_with_a_long_path_is_one_line(book, tmp_path, capsys):
    record.log(book, Note(unit="P1", note="before the backup", by="AB"))
    deep = tmp_path / ("a-rather-long-folder-name-" * 4) / ("and-another-one-" * 4)
    deep.mkdir(parents=True)
    saved = copy_to(book.conn, deep / "saved-copy-of-the-logbook.db")
    assert len(str(saved)) > 200  # longer than the width the tables are drawn at
    capsys.readouterr()
    assert main(["--db", str(book.path), "restore", str(saved)]) == 0
    out, err = capsys.readouterr()
    lines = [line for line in out.splitlines() if line.strip()]
    assert len(lines) == 1, lines
    assert str(saved) in lines[0] and "previous logbook is kept as" in lines[0]


def test_an_error_naming_a_long_path_is_one_line(tmp_path, capsys):
    missing = tmp_path / ("no-such-folder-for-a-logbook-" * 6) / "gone.db"
    assert main(["--db", str(tmp_path / "b.db"), "restore", str(missing)]) == 2
    out, err = capsys.readouterr()
    lines = [line for line in (out + err).splitlines() if line.strip()]
    assert len(lines) == 1 and str(missing) in lines[0]
