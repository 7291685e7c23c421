"""`register.read_all` fills each record in from its row tuple (the watch list reads the whole
register on every call); it must give exactly what `list_all` builds through each record's
__init__: equal records of the same class, in the same order, with the same attributes in
the same order, yes/no columns as booleans."""

from __future__ import annotations

from pathlib import Path

from store.db.book import open_book
from store.ledger.register import TABLES, FilterPosition, Unit, list_all, read_all


def test_read_all_equals_list_all_for_every_register(demo_file: Path, tmp_path: Path) -> None:
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
            full, lean = list_all(book, cls), read_all(book, cls)
            assert len(full) >= 1, cls
            assert lean == full, cls
            for a, b in zip(lean, full, strict=True):
                assert type(a) is type(b)
                assert list(vars(a).items()) == list(vars(b).items())
        assert {p.gauge for p in read_all(book, FilterPosition)} == {True, False}
        assert {u.hour_meter for u in read_all(book, Unit)} == {True, False}
        assert all(type(p.gauge) is bool for p in read_all(book, FilterPosition))
