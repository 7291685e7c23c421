"""Two laptops: `merge` brings in every entry and register change by UUID, idempotent and
order-independent, and reports what a person must decide instead of guessing."""

from __future__ import annotations

import random
import shutil
import sqlite3
from datetime import timedelta
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError, NotALogbook
from store.base.session import fixed_clock
from store.base.timeutil import format_utc, utc_now
from store.db import schema
from store.db.book import open_book
from store.exchange.merge import merge
from store.ledger import journal, register
from store.ledger.entries import Note, Reading, Sample, TopUp, Void
from store.ledger.register import Breather, FilterPosition, Unit
from tests.kit.plant import fill_register

TABLES = ("technicians", "fluids", "units", "filters", "breathers", "shifts", "register_log")


def _fast(book):
    # Test speed only: these tests are about what lands, not about surviving power loss.
    book.conn.execute("PRAGMA synchronous = OFF")
    return book


def _open(path: Path):
    return _fast(open_book(path))


def _dump(path: Path, table: str) -> list[tuple]:
    conn = sqlite3.connect(path)
    try:
        key = (
            "name" if table == "shifts" else "id" if table in ("entries", "register_log") else "tag"
        )
        return conn.execute(f"SELECT * FROM {table} ORDER BY {key}").fetchall()
    finally:
        conn.close()


def _ids(path: Path) -> set[str]:
    return {row[0] for row in _dump(path, "entries")}


def _base(tmp_path: Path) -> Path:
    """The plant's logbook as it was when the second laptop got a copy of it."""
    path = tmp_path / "base.db"
    with _open(path) as book:
        fill_register(book)
        record.log_many(
            book,
            [
                Reading(filter="P1-RF", dp_bar=0.6, temp_c=45, by="AB"),
                Reading(filter="P1-RF", dp_bar=0.8, temp_c=47, by="AB"),
                Note(unit="P1", note="commissioned", by="CD"),
            ],
        )
    return path


def _laptops(tmp_path: Path) -> tuple[Path, Path]:
    base = _base(tmp_path)
    a, b = tmp_path / "a.db", tmp_path / "b.db"
    shutil.copy(base, a)
    shutil.copy(base, b)
    return a, b


def _merged(tmp_path: Path, first: Path, second: Path, name: str) -> tuple[Path, object]:
    out = tmp_path / name
    shutil.copy(first, out)
    with _open(out) as book:
        report = merge(book, second)
    return out, report


def _diverge(a: Path, b: Path) -> None:
    """Each laptop logs its own entries and registers its own things."""
    with _open(a) as book:
        first = journal.read(book)[0]
        record.log(book, Reading(filter="P1-RF", dp_bar=1.1, temp_c=50, by="AB"))
        record.log(book, TopUp(unit="P1", volume_l=12, filtered_um=10, by="AB"))
        record.log(book, Void(voids=first.id, note="wrong filter", by="AB"))
        register.add(book, Breather(tag="P1-BR2", unit="P1"), by="AB")
        record.log(book, Note(unit="P1", note="second breather fitted", by="AB"))
    with _open(b) as book:
        register.add(book, Unit(tag="P2", name="Press 2", fluid="HV46"), by="CD")
        register.add(
            book,
            FilterPosition(tag="P2-RF", unit="P2", kind="return", limit_bar=2.5, bypass_bar=3.5),
            by="CD",
        )
        record.log(book, Reading(filter="P2-RF", dp_bar=0.4, temp_c=40, by="CD"))
        record.log(book, Reading(filter="P1-RF", dp_bar=1.0, temp_c=49, by="CD"))
        record.log(book, Sample(unit="P2", code="18/16/13", by="CD"))


def test_merge_brings_in_everything_and_is_order_independent(tmp_path):
    a, b = _laptops(tmp_path)
    _diverge(a, b)
    ab, report_ab = _merged(tmp_path, a, b, "ab.db")
    ba, report_ba = _merged(tmp_path, b, a, "ba.db")
    assert not report_ab.conflicts and not report_ba.conflicts
    assert _ids(ab) == _ids(ba) == _ids(a) | _ids(b)
    assert _dump(ab, "entries") == _dump(ba, "entries")  # entry for entry, every column
    for table in TABLES:
        assert _dump(ab, table) == _dump(ba, table), table
    assert report_ab.entries_added == len(_ids(b) - _ids(a)) == 3
    assert report_ab.entries_known == 3  # the common history
    assert sorted(report_ab.register_added) == ["filter P2-RF", "unit P2"]
    assert sorted(report_ba.register_added) == ["breather P1-BR2"]
    # Each laptop's register changes came along with what they describe.
    logged = {(r[4], r[5]) for r in _dump(ab, "register_log")}
    assert {("P2", "*"), ("P2-RF", "*"), ("P1-BR2", "*")} <= logged
    # The void made on laptop A voids the entry on the merged book too.
    with _open(ab) as book:
        voided = [e for e in journal.read(book) if e.voided]
        assert len(voided) == 1 and voided[0].note == "" and voided[0].dp_bar == 0.6
        assert book.conn.execute("PRAGMA foreign_key_check").fetchall() == []
        assert "3 entries added" in report_ab.summary() and "no conflicts" in report_ab.summary()


def test_merging_twice_adds_nothing(tmp_path):
    a, b = _laptops(tmp_path)
    _diverge(a, b)
    ab, _ = _merged(tmp_path, a, b, "ab.db")
    before = {t: _dump(ab, t) for t in (*TABLES, "entries")}
    with _open(ab) as book:
        again = merge(book, b)
        # and the merged book merged back into B's copy lands on the same entries
    assert again.entries_added == 0 and again.register_added == [] and again.log_added == 0
    assert again.entries_known == len(_ids(b))
    assert {t: _dump(ab, t) for t in before} == before
    b2, _ = _merged(tmp_path, b, ab, "b2.db")
    assert _dump(b2, "entries") == _dump(ab, "entries")


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_random_histories_merge_the_same_either_way(tmp_path, seed):
    rng = random.Random(seed)
    a, b = _laptops(tmp_path)
    books = {a: _open(a), b: _open(b)}
    try:
        for step in range(40):
            path = rng.choice([a, b])
            book = books[path]
            roll = rng.random()
            if roll < 0.6:
                record.log(
                    book,
                    Reading(
                        filter=rng.choice(["P1-RF", "P1-PF"]), dp_bar=rng.uniform(0.2, 2), by="AB"
                    ),
                )
            elif roll < 0.8:
                record.log(book, Note(unit="P1", note=f"step {step}", by=rng.choice(["AB", "CD"])))
            else:
                live = [e for e in journal.read(book) if not e.voided and e.kind != "void"]
                if live:
                    record.log(book, Void(voids=rng.choice(live).id, note="mistake", by="CD"))
    finally:
        for book in books.values():
            book.close()
    ab, report_ab = _merged(tmp_path, a, b, "ab.db")
    ba, report_ba = _merged(tmp_path, b, a, "ba.db")
    assert _ids(ab) | _ids(ba) == _ids(a) | _ids(b)
    # The one case that cannot commute is the same entry voided on both laptops; it is
    # reported, and the entry ends up voided either way.
    double = [c for c in report_ab.conflicts if "voided here already" in c]
    assert report_ab.conflicts == double
    if not double:
        assert _dump(ab, "entries") == _dump(ba, "entries")
    with _open(ab) as one, _open(ba) as other:
        voided = lambda bk: {e.id for e in journal.read(bk) if e.voided}  # noqa: E731
        assert voided(one) == voided(other)


def test_register_conflicts_are_reported_and_left_alone(tmp_path):
    a, b = _laptops(tmp_path)
    with _open(a) as book:
        register.update(book, FilterPosition, "P1-RF", {"limit_bar": 2.2}, by="AB")
    with _open(b) as book:
        register.update(
            book, FilterPosition, "P1-RF", {"limit_bar": 2.4, "element": "RX-20"}, by="CD"
        )
        record.log(book, Reading(filter="P1-RF", dp_bar=1.5, by="CD"))
    ab, report = _merged(tmp_path, a, b, "ab.db")
    ba, report_back = _merged(tmp_path, b, a, "ba.db")
    assert len(report.conflicts) == 1
    line = report.conflicts[0]
    assert "P1-RF" in line and "limit_bar here 2.2, there 2.4" in line
    assert "element here RX-10, there RX-20" in line
    assert "limit_bar here 2.4, there 2.2" in report_back.conflicts[0]
    with _open(ab) as book:
        assert register.get(book, FilterPosition, "P1-RF").limit_bar == 2.2  # nothing changed
    # The other laptop's change log for the disputed tag is not claimed as done here.
    changes = [r for r in _dump(ab, "register_log") if r[4] == "P1-RF" and r[5] != "*"]
    assert [(r[5], r[6], r[7]) for r in changes] == [("limit_bar", "2.5", "2.2")]
    # Entries still merge, entry for entry, both ways.
    assert _dump(ab, "entries") == _dump(ba, "entries")
    assert "1 conflicts left for you to decide" in report.summary()


def test_an_entry_without_its_tag_is_reported_not_dropped(tmp_path):
    a, b = _laptops(tmp_path)
    with _open(a) as book:
        register.add(book, Breather(tag="P1-X", unit="P1"))
    with _open(b) as book:
        register.add(book, FilterPosition(tag="P1-X", unit="P1", kind="offline"))
        for dp in (0.3, 0.4, 0.5):
            record.log(book, Reading(filter="P1-X", dp_bar=dp, by="CD"))
        record.log(book, Note(unit="P1", note="offline loop fitted", by="CD"))
    with _open(a) as book:
        report = merge(book, b)
        assert report.entries_added == 1  # the note
        assert report.entries_left_out == 3
        text = " ".join(report.conflicts)
        assert "a filter P1-X" in text and "a breather P1-X" in text
        assert "3 entries left out" in text and "filter P1-X is not in this book's register" in text
        assert "3 entries left out" in report.summary() or "left out" in report.summary()


def test_merge_is_all_or_nothing(tmp_path, monkeypatch):
    a, b = _laptops(tmp_path)
    _diverge(a, b)
    before = {t: _dump(a, t) for t in (*TABLES, "entries")}
    calls = []

    def failing_hook(book, entry, reg=None):
        calls.append(entry.id)
        raise RuntimeError("power cut in the middle of the merge")

    monkeypatch.setattr("store.derived.statuscache.after_entry", failing_hook)
    with _open(a) as book:
        with pytest.raises(RuntimeError):
            merge(book, b)
    assert calls  # the failure came after rows had been written...
    assert {t: _dump(a, t) for t in before} == before  # ...and none of them stayed


def test_a_full_disk_during_merge_changes_nothing(tmp_path):
    a, b = _laptops(tmp_path)
    with _open(b) as book:
        record.log_many(book, [Note(unit="P1", note="x" * 1500, by="CD") for _ in range(40)])
    before = _dump(a, "entries")
    with _open(a) as book:
        pages = book.conn.execute("PRAGMA page_count").fetchone()[0]
        book.conn.execute(f"PRAGMA max_page_count = {pages + 2}")
        with pytest.raises(BookError, match="full"):
            merge(book, b)
        assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert _dump(a, "entries") == before


def test_refuses_itself_and_files_that_are_not_logbooks(tmp_path):
    a, b = _laptops(tmp_path)
    link = tmp_path / "link.db"
    link.symlink_to(a)
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"SQLite format 3\x00" + bytes(4000))
    foreign = tmp_path / "foreign.db"
    conn = sqlite3.connect(foreign)
    conn.execute("CREATE TABLE entries (id TEXT)")
    conn.commit()
    conn.close()
    before = _dump(a, "entries")
    with _open(a) as book:
        for same in (a, link, Path(str(a).replace("/a.db", "/./a.db"))):
            with pytest.raises(BookError, match="itself"):
                merge(book, same)
        with pytest.raises(NotALogbook):
            merge(book, junk)
        with pytest.raises(NotALogbook, match="not a sumpbook logbook"):
            merge(book, foreign)
        with pytest.raises(BookError):
            merge(book, tmp_path / "missing.db")
    assert _dump(a, "entries") == before


def test_an_entry_from_a_laptop_with_a_wrong_clock_is_held_back(tmp_path, monkeypatch):
    a, b = _laptops(tmp_path)
    ahead = (utc_now() + timedelta(days=30)).strftime("%Y-%m-%dT%H:%M:%SZ")
    with _open(b) as book:
        book.clock = fixed_clock(ahead)  # laptop B's clock is a month fast
        record.log(book, Reading(filter="P1-RF", dp_bar=1.3, by="CD"))
    with _open(a) as book:
        report = merge(book, b)
    assert report.entries_added == 0 and report.entries_left_out == 1
    assert "more than a day ahead" in report.conflicts[0]


def test_the_same_id_with_different_content_is_reported(tmp_path):
    a, b = _laptops(tmp_path)
    shared = _dump(a, "entries")[0]
    conn = sqlite3.connect(b)  # a tampered copy: same id, another note (plain SQL, test only)
    conn.execute("DROP TRIGGER entries_no_update")
    conn.execute("UPDATE entries SET note = 'edited' WHERE id = ?", [shared[0]])
    conn.commit()
    conn.close()
    with _open(a) as book:
        report = merge(book, b)
    assert any(shared[0][:8] in c and "differs" in c for c in report.conflicts)
    assert _dump(a, "entries")[0] == shared


def test_an_older_logbook_is_merged_from_an_upgraded_copy(tmp_path, monkeypatch):
    old = tmp_path / "old.db"
    monkeypatch.setattr("store.db.book.MIGRATIONS", schema.MIGRATIONS[:1])
    monkeypatch.setattr("store.db.book.SCHEMA_VERSION", 1)
    monkeypatch.setattr("store.db.connection.SCHEMA_VERSION", 1)
    open_book(old).close()  # a version-1 logbook, as the first sumpbook wrote them
    monkeypatch.undo()
    conn = sqlite3.connect(old)
    conn.execute("INSERT INTO technicians(tag) VALUES ('AB')")
    conn.execute("INSERT INTO units(tag) VALUES ('P1')")
    conn.execute(
        "INSERT INTO entries(id, at_utc, logged_utc, kind, by, unit, note) "
        "VALUES ('6f1c2a52-4f8e-4d0e-9a51-0c2b9a7d3e11', '2026-01-05T07:00:00Z', "
        "'2026-01-05T07:00:00Z', 'note', 'AB', 'P1', 'from an older sumpbook')"
    )
    conn.commit()
    conn.close()
    raw = old.read_bytes()
    a = _base(tmp_path)
    with _open(a) as book:
        report = merge(book, old)
        notes = [e.note for e in journal.read(book)]
    assert report.entries_added == 1 and "from an older sumpbook" in notes
    assert old.read_bytes() == raw  # the other laptop's file is never written


def _latest_p1rf(path: Path) -> tuple:
    from store import views  # the list only for these tests

    with _open(path) as book:
        row = next(f for f in views.watch(book).filters if f.filter == "P1-RF")
    return row.dp_bar, row.percent_of_limit


def _same_second_laptops(tmp_path: Path) -> tuple[Path, Path, object]:
    """Both laptops with one frozen clock (every save logged the same second), an hour after
    the base's entries; and the time two readings will be typed with."""
    a, b = _laptops(tmp_path)
    later = utc_now() + timedelta(hours=1)
    for path in (a, b):
        with _open(path) as book:
            book.set_setting("clock", format_utc(later))
    return a, b, later - timedelta(minutes=5)


def test_two_readings_at_one_second_read_the_same_on_both_laptops(tmp_path):
    # Laptop A logs two readings of one filter typed with the same time, in the same logging
    # second (a gauge read again and logged at once); laptop B gets them by a merge (a sync's
    # pull is a merge). A book reads same-second entries in the order it wrote them; the
    # merge writes them in A's order, so B reads what A reads. The ids are chosen so that
    # their own order is the opposite of A's (the merge once wrote them by id: B showed
    # 1.71 bar, 68 % of the limit, where A showed 0.91, 36 %).
    a, b, at = _same_second_laptops(tmp_path)
    with _open(a) as book:
        for entry_id, dp_bar in (("ffffffff-0000-4000-8000-000000000001", 1.71),
                                 ("00000000-0000-4000-8000-000000000002", 0.91)):  # fmt: skip
            record.save(book, Reading(id=entry_id, filter="P1-RF", dp_bar=dp_bar, at=at, by="AB"))
    with _open(b) as book:
        merge(book, a)
    assert _ids(a) == _ids(b)
    assert _latest_p1rf(a) == _latest_p1rf(b) == (0.91, pytest.approx(36.4, abs=0.05))


@pytest.mark.xfail(
    strict=True,
    reason="known gap: two laptops each logging a reading of one filter with the same time in "
    "the same second read them in opposite orders (each its own first); what both hold does "
    "not tell which was written first",
)
def test_readings_of_one_second_from_two_laptops_read_the_same_on_both(tmp_path):
    a, b, at = _same_second_laptops(tmp_path)
    for path, dp_bar in ((a, 1.71), (b, 0.91)):
        with _open(path) as book:
            record.save(book, Reading(filter="P1-RF", dp_bar=dp_bar, at=at, by="AB"))
    with _open(a) as book:
        merge(book, b)
    with _open(b) as book:
        merge(book, a)
    assert _ids(a) == _ids(b)
    assert _latest_p1rf(a) == _latest_p1rf(b)
