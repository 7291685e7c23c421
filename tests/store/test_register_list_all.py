"""`register.list_all` fills each record in from its row tuple (the watch list reads the whole
register on every call); it must give exactly what each record's __init__ builds from the same
rows by keyword (`_from_row`, as `get` builds one record): equal records of the same class, in
the same order, with the same attributes in the same order, yes/no columns as booleans."""

from __future__ import annotations

from pathlib import Path

from store.db.book import open_book
from store.ledger import register
from store.ledger.register import TABLES, FilterPosition, Unit, list_all


def test_list_all_equals_each_record_built_by_its_init(demo_file: Path, tmp_path: Path) -> None:
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    with open_book(path, create=False) as book:
        # One position without a gauge and one unit with an hour meter, so both yes/no
        # columns read both ways.
        book.conn.execute("UPDATE filters SET gauge = 0 WHERE tag = (SELECT min(tag) FROM filters)")
        book.conn.execute(
            "UPDATE units SET hour_meter = 1 WHERE tag = (SELECT min(tag) FROM units)"
        )
        for cls in TABLES:
            table = TABLES[cls]
            rows = register._rows(book, f"SELECT * FROM {table} ORDER BY tag", [])
            full = [register._from_row(cls, r) for r in rows]
            lean = list_all(book, cls)
            assert len(full) >= 1, cls
            assert lean == full, cls
            for a, b in zip(lean, full, strict=True):
                assert type(a) is type(b)
                assert list(vars(a).items()) == list(vars(b).items())
        assert {p.gauge for p in list_all(book, FilterPosition)} == {True, False}
        assert {u.hour_meter for u in list_all(book, Unit)} == {True, False}
        assert all(type(p.gauge) is bool for p in list_all(book, FilterPosition))
