"""Entries: every kind round-trips, voids mark without deleting, bad input writes nothing."""

from datetime import UTC, datetime, timedelta

import pytest

from store import record
from store.base.errors import BookError
from store.ledger import journal
from store.ledger.entries import BreatherSwap, ElementChange, Note, Reading, Sample, TopUp, Void


def count(book):
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def test_every_kind_is_written_and_read_back(book):
    at = book.now() - timedelta(hours=2)
    made = [
        Reading(
            filter="p1-rf", dp_bar=1.1, temp_c=42.0, flow_lpm=110.0, hours=1200.0, by="ab", at=at
        ),
        Reading(filter="P1-PF", indicator="dirty", by="AB", at=at),
        ElementChange(
            filter="P1-RF", reason="limit", condition="caked", batch="L-77", by="CD", at=at
        ),
        TopUp(unit="P1", volume_l=12.5, filtered_um=3.0, by="AB", at=at),
        BreatherSwap(breather="P1-BR", reason="spent", condition="2/3 spent", by="AB", at=at),
        Sample(
            unit="P1", c4_per_ml=2000, c6_per_ml=500, c14_per_ml=60, water_ppm=120, by="AB", at=at
        ),
        Note(unit="P1", note="hose weeping at the cylinder", by="AB", at=at),
    ]
    saved = record.log_many(book, made)
    back = journal.read(book)
    assert [e.id for e in back] == [e.id for e in saved]
    assert [e.kind for e in back] == [
        "reading",
        "reading",
        "change",
        "topup",
        "breather",
        "sample",
        "note",
    ]
    reading = back[0]
    assert (reading.filter, reading.unit, reading.dp_bar, reading.temp_c) == (
        "P1-RF",
        "P1",
        1.1,
        42.0,
    )
    assert back[3].fluid == "HV46"  # the unit's fluid by default
    # ISO 4406 table (REFERENCES.md §1c): 2000/500/60 per mL is 18/16/13
    assert back[5].code == "18/16/13"
    assert all(len(e.id) == 36 and e.at == at.replace(microsecond=0) for e in back)


def test_void_marks_the_entry_and_keeps_it(book):
    first = record.log(book, Reading(filter="P1-RF", dp_bar=9.0, by="AB"))
    void = record.log(book, Void(voids=first.id[:8], note="typed 9 for 0.9", by="CD"))
    back = {e.id: e for e in journal.read(book)}
    assert back[first.id].voided_by == void.id
    assert back[void.id].voids == first.id
    assert [e.id for e in journal.read(book, include_voided=False)] == [void.id]
    live = book.conn.execute("SELECT id FROM live_entries").fetchall()
    assert [r[0] for r in live] == [void.id]


@pytest.mark.parametrize(
    ("entry", "message"),
    [
        (Reading(filter="P1-RX", dp_bar=1.0, by="AB"), "did you mean"),
        (Reading(filter="P1-RF", dp_bar=-0.1, by="AB"), "outside"),
        (Reading(filter="P1-RF", dp_bar=150.0, by="AB"), "outside"),
        (Reading(filter="P1-RF", dp_bar=float("nan"), by="AB"), "number"),
        (Reading(filter="P1-RF", dp_bar=1.0, temp_c=-41, by="AB"), "outside"),
        (Reading(filter="P1-RF", dp_bar=1.0, temp_c=151, by="AB"), "outside"),
        (Reading(filter="P1-RF", by="AB"), "ΔP value or an indicator"),
        (Reading(filter="P1-RF", indicator="purple", by="AB"), "indicator must be"),
        (Reading(filter="P1-RF", dp_bar=1.0, by="ZZ"), "unknown technician"),
        (Reading(filter="P1-RF", dp_bar=1.0, by=""), "who made"),
        (
            Reading(filter="P1-RF", dp_bar=1.0, by="AB", at=datetime.now(UTC) + timedelta(days=3)),
            "ahead",
        ),
        (ElementChange(filter="P1-RF", reason="bored", by="AB"), "reason"),
        (TopUp(unit="P1", volume_l=0, by="AB"), "outside"),
        (Sample(unit="P1", by="AB"), "needs"),
        (Sample(unit="P1", code="18/16/13", c6_per_ml=5, c14_per_ml=1, by="AB"), "does not match"),
        (Void(voids="123", note="x", by="AB"), "6 characters"),
        (Void(voids="abcdef12", note="x", by="AB"), "no entry"),
        (Note(unit="P1", note="bell\x07", by="AB"), "control"),
    ],
)
def test_bad_input_is_refused_and_nothing_is_written(book, entry, message):
    with pytest.raises(BookError, match=message):
        record.log(book, entry)
    assert count(book) == 0


def test_void_twice_or_void_a_void_is_refused(book):
    first = record.log(book, Reading(filter="P1-RF", dp_bar=1.0, by="AB"))
    void = record.log(book, Void(voids=first.id, note="wrong", by="AB"))
    with pytest.raises(BookError, match="voided already"):
        record.log(book, Void(voids=first.id, note="again", by="AB"))
    with pytest.raises(BookError, match="cannot be voided"):
        record.log(book, Void(voids=void.id, note="undo", by="AB"))
    with pytest.raises(BookError, match="say why"):
        record.log(book, Void(voids=first.id, note=" ", by="AB"))
    assert count(book) == 2


def test_log_many_is_all_or_nothing(book):
    good = Reading(filter="P1-RF", dp_bar=1.0, by="AB")
    bad = Reading(filter="P1-RF", dp_bar=-1.0, by="AB")
    with pytest.raises(BookError):
        record.log_many(book, [good, good, bad])
    assert count(book) == 0


def test_read_filters_by_time_unit_and_kind(book):
    t0 = book.now() - timedelta(days=3)
    record.log_many(
        book,
        [
            Reading(filter="P1-RF", dp_bar=1.0, by="AB", at=t0),
            TopUp(unit="P1", volume_l=5, by="AB", at=t0 + timedelta(days=1)),
            Reading(filter="P1-RF", dp_bar=1.1, by="AB", at=t0 + timedelta(days=2)),
        ],
    )
    assert len(journal.read(book, since=t0 + timedelta(hours=1))) == 2
    assert len(journal.read(book, kinds=["topup"])) == 1
    assert len(journal.read(book, filter="P1-RF", until=t0 + timedelta(days=1))) == 1
    assert [e.dp_bar for e in journal.read(book, kinds=["reading"], newest_first=True)] == [
        1.1,
        1.0,
    ]


def test_voids_of_one_filter_refresh_it_once(book, monkeypatch):
    # A batch with many voids on one filter (a CSV import, a merge) recomputes that filter
    # once, not once per void.
    readings = record.log_many(
        book, [Reading(filter="P1-RF", dp_bar=1.0 + i / 10, by="AB") for i in range(6)]
    )
    calls = []
    monkeypatch.setattr(
        "store.derived.statuscache.after_entry",
        lambda b, e, reg=None: calls.append(type(e).__name__),
    )
    record.log_many(book, [Void(voids=r.id, note="typed twice", by="AB") for r in readings[:5]])
    assert calls == ["Void"]
    assert sum(e.voided for e in journal.read(book, filter="P1-RF")) == 5


def test_the_sound_row_test_reads_as_each_column_s_type_test():
    # SQLite's documentation of typeof(): a value is 'null', 'integer', 'real', 'text' or
    # 'blob' (from memory); a row is sound when each number column holds a number or nothing
    # and each text column a text or nothing, whatever the other columns hold. _SOUND tells
    # them by SQLite's order of values, NULL < numbers < texts < blobs, texts by collation and
    # blobs by memcmp (SQLite's "Datatypes In SQLite", from memory). The columns typed as
    # none, and as the book types them (numbers REAL, texts TEXT COLLATE NOCASE).
    import sqlite3

    from store.base import validate

    columns = [c for c in journal._FIELDS if c != "id"]
    values = ["NULL", "7", "-3", "2.5", "-1e999", "''", "'x'", "'7'", "' '", "x''", "x'00ff'"]
    kinds = {c: ("real", "integer") if c in validate.ENTRY_NUMBERS else ("text",) for c in columns}
    declared = {
        c: "REAL" if c in validate.ENTRY_NUMBERS else "TEXT COLLATE NOCASE" for c in columns
    }
    for types in ({c: "" for c in columns}, declared):
        conn = sqlite3.connect(":memory:")
        conn.execute(f"CREATE TABLE e ({', '.join(f'{c} {types[c]}' for c in columns)})")
        rows = [{c: "NULL" for c in columns}]
        rows += [{**rows[0], c: v} for c in columns for v in values]
        rows += [
            {c: values[(i + j) % len(values)] for j, c in enumerate(columns)}
            for i in range(len(values))
        ]
        for row in rows:
            conn.execute(f"INSERT INTO e VALUES ({', '.join(row[c] for c in columns)})")
        got = [r[0] for r in conn.execute(f"SELECT {journal._SOUND} FROM e ORDER BY rowid")]
        typed = conn.execute(
            f"SELECT {', '.join(f'typeof({c})' for c in columns)} FROM e ORDER BY rowid"
        ).fetchall()
        expected = [
            int(all(t in (*kinds[c], "null") for c, t in zip(columns, r, strict=True)))
            for r in typed
        ]
        assert got == expected
        assert 0 in got and 1 in got
