"""A filter's earlier kept rows (`statuscache.kept_as_of`, schema 8) stand for a past time
only where they provably hold then: the list as of that time is the computation from the
entries as they stood (`assert_same`, tests/store/test_status_as_of.py), whether a row stood
in or not. What is checked here is that the rows are used where they hold (no fit) and left
where an input moved: a reading written later but dated before the time, a void dated before
it, a register change, a like position's element change (common practice, no source: the
reference is sumpbook's own computation from the entries)."""

from __future__ import annotations

import sqlite3
from datetime import timedelta
from pathlib import Path

import pytest

from store import record, views
from store.base.timeutil import format_utc
from store.db import schema
from store.db.book import open_book
from store.derived import statuscache
from store.ledger import register as registry
from store.ledger.entries import ElementChange, Reading, Void
from store.ledger.register import FilterPosition
from tests.kit.kept_demo import kept_copy, pooling
from tests.kit.schema_steps import drop_tables_after
from tests.store.test_status_as_of import assert_same, fitted_again

SHIFT = timedelta(hours=8)


@pytest.fixture
def demo(demo_file: Path, tmp_path: Path) -> Path:
    return kept_copy(demo_file, tmp_path)


def gauged(book, count: int) -> list[str]:
    """Filters read on a gauge that lean on no like positions (their rows' keys end .own)."""
    return [
        tag
        for (tag,) in book.conn.execute(
            "SELECT c.filter FROM status_cache c JOIN filters f ON f.tag = c.filter "
            "WHERE f.gauge = 1 AND c.key LIKE '%.own' ORDER BY c.filter LIMIT ?",
            [count],
        )
    ]


def technician(book) -> str:
    """The first technician of the register, who logs the tests' entries."""
    return book.conn.execute("SELECT tag FROM technicians ORDER BY tag").fetchone()[0]


def read_shifts(book, tags: list[str], shifts: int) -> list:
    """A reading of each of `tags` at the start of each of `shifts` shifts after the book's
    end (the clock moved on with them); the times of the shifts."""
    tech = technician(book)
    start = book.now()
    times = []
    for i in range(shifts):
        at = start + SHIFT * (i + 1)
        book.set_setting("clock", format_utc(at + timedelta(minutes=30)))
        for j, tag in enumerate(tags):
            dp = 0.4 + 0.05 * i + 0.01 * j
            record.log(book, Reading(filter=tag, dp_bar=dp, temp_c=45, by=tech, at=at))
        times.append(at)
    return times


def computed_at(book, monkeypatch, times: list) -> list[list[str]]:
    """The filters the list as of each of `times` computes from the entries (no kept or
    earlier row stood), each list then held to the computation (`assert_same`)."""
    out = []
    for at in times:
        computed = fitted_again(monkeypatch)
        views.watch(book, as_of=at)
        out.append(list(computed))
        monkeypatch.undo()
    for at in times:
        assert_same(book, at)
    return out


def moved_only_from(book, monkeypatch, dated, end) -> list[list[str]]:
    """`computed_at` five minutes before an entry written late but `dated` back, five minutes
    after, and at `end`."""
    near = timedelta(minutes=5)
    return computed_at(book, monkeypatch, [dated - near, dated + near, end])


def test_a_past_shift_is_read_from_the_rows_kept_then(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        tags = gauged(book, 4)
        assert len(tags) == 4
        end = book.now()
        times = read_shifts(book, tags, 3)
        kept = book.conn.execute(
            "SELECT upper(filter), count(*) FROM status_earlier GROUP BY 1"
        ).fetchall()
        assert sorted(kept) == sorted((t.upper(), 3) for t in tags)  # one a save
        computed = fitted_again(monkeypatch)
        asked = [end, times[0] - timedelta(seconds=1), times[0], times[1] + SHIFT / 2, times[2]]
        for at in asked:
            views.watch(book, as_of=at)
        assert computed == []  # every filter's row of the time stood in
        monkeypatch.undo()
        for at in asked:
            assert_same(book, at)


def test_a_row_checked_up_to_a_rowid_far_behind_is_left_to_the_computation(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        tags = gauged(book, 2)
        times = read_shifts(book, tags, 2)
        monkeypatch.setattr(statuscache, "EARLIER_SCAN", 0)  # every earlier row is too far
        computed = fitted_again(monkeypatch)
        views.watch(book, as_of=times[0])
        assert sorted(computed) == sorted(tags)
        monkeypatch.undo()
        assert_same(book, times[0])


def test_a_reading_written_later_but_dated_before_the_time_is_seen(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        tags = gauged(book, 2)
        times = read_shifts(book, tags, 2)
        tech = technician(book)
        late = times[0] + SHIFT / 4  # written after the second shift's readings
        record.log(book, Reading(filter=tags[0], dp_bar=0.47, temp_c=44, by=tech, at=late))
        # before it the row kept after the first shift holds; after it, none kept before it
        assert moved_only_from(book, monkeypatch, late, times[1]) == [[], [tags[0]], []]


def test_a_void_counts_from_its_own_time(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        tags = gauged(book, 2)
        times = read_shifts(book, tags, 2)
        tech = technician(book)
        first = book.conn.execute(
            "SELECT id FROM entries WHERE filter = ? AND at_utc = ?",
            [tags[1], format_utc(times[0])],
        ).fetchone()[0]
        voided_at = times[0] + SHIFT / 2  # dated between the readings, written after both
        record.log(book, Void(voids=first, note="wrong filter", by=tech, at=voided_at))
        # not voided yet before it: the rows kept then hold; voided after it: computed
        assert moved_only_from(book, monkeypatch, voided_at, times[1]) == [[], [tags[1]], []]


def test_a_register_change_leaves_the_earlier_rows(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        tags = gauged(book, 2)
        times = read_shifts(book, tags, 2)
        position = registry.get(book, FilterPosition, tags[0])
        registry.update(book, FilterPosition, tags[0], {"limit_bar": position.limit_bar + 0.5})
        computed = fitted_again(monkeypatch)
        views.watch(book, as_of=times[0])
        assert computed == [tags[0]]  # keyed by the register as it was
        monkeypatch.undo()
        assert_same(book, times[0])


def test_a_like_position_s_change_reaches_the_rows_that_lean_on_it(demo, monkeypatch):
    with open_book(demo, create=False) as book:
        leaning, like = pooling(book)
        times = read_shifts(book, [leaning], 2)
        tech = technician(book)
        changed = times[0] + SHIFT / 2  # dated between the readings, written after both
        record.log(book, ElementChange(filter=like, by=tech, at=changed))
        computed = fitted_again(monkeypatch)
        views.watch(book, as_of=times[0])
        assert leaning not in [t.upper() for t in computed]  # before the change: it holds
        computed.clear()
        views.watch(book, as_of=changed + timedelta(minutes=5))
        assert leaning in [t.upper() for t in computed]
        monkeypatch.undo()
        for at in (times[0], changed + timedelta(minutes=5), times[1]):
            assert_same(book, at)


def test_only_the_last_rows_stay_and_a_rebuild_empties_them(demo):
    with open_book(demo, create=False) as book:
        (tag,) = gauged(book, 1)
        read_shifts(book, [tag], statuscache.EARLIER_KEPT + 3)
        seen = [
            s
            for (s,) in book.conn.execute(
                "SELECT seen_rowid FROM status_earlier WHERE filter = ? ORDER BY seen_rowid",
                [tag],
            )
        ]
        assert len(seen) == statuscache.EARLIER_KEPT
        saves = book.conn.execute(
            "SELECT rowid FROM entries WHERE filter = ? ORDER BY rowid DESC LIMIT ?",
            [tag, statuscache.EARLIER_KEPT + 1],
        ).fetchall()
        # the row before each of the last saves, each checked up to the rowid before that save
        assert seen == sorted(r - 1 for (r,) in saves[:-1])  # the newest row is kept now
        statuscache.rebuild(book)
        assert book.conn.execute("SELECT count(*) FROM status_earlier").fetchone()[0] == 0


def test_a_schema_7_book_gets_the_table_and_keeps_its_rows(demo: Path, tmp_path: Path) -> None:
    path = tmp_path / "v7.db"
    path.write_bytes(demo.read_bytes())
    conn = sqlite3.connect(path)
    rows = conn.execute("SELECT * FROM status_cache ORDER BY filter").fetchall()
    conn.executescript(drop_tables_after(7) + "PRAGMA user_version = 7;")
    conn.close()
    with open_book(path, create=False) as book:
        assert book.conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION
        assert book.conn.execute("SELECT * FROM status_cache ORDER BY filter").fetchall() == rows
        assert book.conn.execute("SELECT count(*) FROM status_earlier").fetchone()[0] == 0
