"""Merge writes the other book's entries in batches (sqlite-utils insert_all on the book's own
connection): several batches, voids between them, and a row refused in a later batch still
leave all or nothing."""

from __future__ import annotations

import shutil
import sqlite3
import uuid
from pathlib import Path

import pytest

from store import record
from store.db.book import open_book
from store.exchange import merge as merging
from store.ledger import journal
from store.ledger.entries import Note, Reading, Void
from tests.kit.plant import fill_register

TABLES = ("technicians", "fluids", "units", "filters", "breathers", "register_log", "entries")


def _dump(path: Path) -> dict[str, list[tuple]]:
    conn = sqlite3.connect(path)
    try:
        return {t: conn.execute(f"SELECT * FROM {t} ORDER BY rowid").fetchall() for t in TABLES}
    finally:
        conn.close()


def _entry_rows(path: Path) -> set[tuple]:
    conn = sqlite3.connect(path)
    try:
        return set(conn.execute("SELECT * FROM entries").fetchall())
    finally:
        conn.close()


def _books(tmp_path: Path) -> tuple[Path, Path]:
    """A: the register only. B: a copy that then logs 40 entries and voids every fifth,
    and a void of one of those voids (written straight into the file: the journal refuses
    it, an older or hand-edited book may hold it)."""
    a, b = tmp_path / "a.db", tmp_path / "b.db"
    with open_book(a) as book:
        fill_register(book)
    shutil.copy(a, b)
    with open_book(b) as book:
        done = record.log_many(
            book,
            [Reading(filter="P1-RF", dp_bar=0.5 + i / 100, temp_c=45, by="AB") for i in range(20)]
            + [Note(unit="P1", note=f"round {i}", by="CD") for i in range(20)],
        )
        voids = record.log_many(
            book, [Void(voids=e.id, note="typed twice", by="AB") for e in done[::5]]
        )
        row = journal._row(voids[0])
        row.update(id=str(uuid.uuid4()), voids=voids[0].id, note="that void was wrong")
        with book.atomic():
            book.conn.execute(
                f"INSERT INTO entries ({', '.join(row)}) VALUES ({', '.join('?' for _ in row)})",
                list(row.values()),
            )
    return a, b


def test_entries_land_in_batches_with_voids_between(tmp_path, monkeypatch):
    monkeypatch.setattr(merging, "BATCH_ROWS", 7)  # 40 entries: several batches
    a, b = _books(tmp_path)
    with open_book(a) as book:
        report = merging.merge(book, b)
    assert report.conflicts == []
    assert report.entries_added == 40 + 8 + 1
    assert _entry_rows(a) == _entry_rows(b)  # every entry, every column


def _twentieth_written(rows: set[tuple]) -> str:
    """The 20th entry the merge writes (in its third batch of 7)."""
    return sorted(rows, key=lambda r: (r[3] == "void", r[1], r[2], r[0]))[19][0]


def _voided_by_a_voided_void(b: Path) -> str:
    """The entry whose void is itself voided: holding it back must hold back both voids."""
    conn = sqlite3.connect(b)
    try:
        (entry,) = conn.execute(
            "SELECT v1.voids FROM entries v2 JOIN entries v1 ON v2.voids = v1.id"
            " WHERE v1.kind = 'void'"
        ).fetchone()
        return entry
    finally:
        conn.close()


@pytest.mark.parametrize("pick", ["twentieth", "voided by a voided void"])
def test_a_row_refused_in_a_later_batch_is_held_back_and_the_rest_land(tmp_path, monkeypatch, pick):
    # issue 20 item 6: a row the file refuses is held back with its reason, never the merge
    monkeypatch.setattr(merging, "BATCH_ROWS", 7)
    a, b = _books(tmp_path)
    if pick == "twentieth":
        refused = _twentieth_written(_entry_rows(b))
    else:
        refused = _voided_by_a_voided_void(b)
    with open_book(a) as book:
        book.conn.execute(
            "CREATE TEMP TRIGGER refuse_one BEFORE INSERT ON main.entries "
            f"WHEN NEW.id = '{refused}' BEGIN SELECT RAISE(ABORT, 'refused here'); END"
        )
        report = merging.merge(book, b)
        assert not book.conn.in_transaction
    # a void of the refused entry cannot land either (what it voids did not come in), nor a
    # void of such a void: the chain is followed to its end (the refused row is picked by
    # random ids; when it is the entry whose void is itself voided, the chain is two long)
    rows = _entry_rows(b)
    held = {refused}
    while grown := {r[0] for r in rows if held & set(r[1:])} - held:
        held |= grown
    its_voids = held - {refused}
    assert report.entries_added == 40 + 8 + 1 - 1 - len(its_voids)
    assert any(refused[:8] in c and "refused here" in c for c in report.conflicts)
    expected = {r[0] for r in _entry_rows(b)} - {refused} - its_voids
    assert {r[0] for r in _entry_rows(a)} == expected
