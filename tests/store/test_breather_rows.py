"""The breathers' kept swaps (store/derived/breathercache.py) stand for the swaps only where
they must: every breather read from a kept row gives what its swaps give, through saves,
voids, entries written past the hooks, a clock moved past a swap dated ahead or set back
before the row, another row format and a row edited by hand. The reference is
`watchlist.breathers_at`, the forecast from the live swaps (itself held to the journal's full
entries by tests/store/test_breather_marks.py); the forecast's rule is the trade's, kept
where it was (store/health/fluidcare.py).
"""

from __future__ import annotations

import sqlite3
from datetime import timedelta
from pathlib import Path

import pytest

from store import record, views
from store.base.timeutil import format_utc
from store.db.book import open_book
from store.derived import breathercache
from store.health import watchlist
from store.health.fluidcare import NO_SWAPS
from store.ledger.entries import BreatherSwap, Void
from tests.kit.kept_demo import kept_copy
from tests.kit.schema_steps import drop_tables_after


@pytest.fixture
def demo(demo_file: Path, tmp_path: Path) -> Path:
    """The demo with its caches made (as `sumpbook rebuild`)."""
    return kept_copy(demo_file, tmp_path)


def tags(book) -> list[str]:
    return [t for (t,) in book.conn.execute("SELECT tag FROM breathers ORDER BY tag")]


def assert_kept_rows_true(book, now) -> dict:
    """Every kept row that holds at `now` gives what the swaps give, and the list's breathers
    are the computation's. Returns the rows that held."""
    kept = breathercache.kept_records(book, now)
    computed = breathercache.computed(book, now, None)
    for tag, rec in kept.items():
        assert rec == computed.get(tag, NO_SWAPS), tag
    assert tuple(views.watch(book).breathers) == tuple(watchlist.breathers_at(book, book.now()))
    return kept


def swap_of(book, tag: str, by: str, at, condition: str = "2/3 spent") -> BreatherSwap:
    return BreatherSwap(breather=tag, condition=condition, by=by, at=at)


def first_tech(book) -> str:
    return book.conn.execute("SELECT tag FROM technicians WHERE active ORDER BY tag").fetchone()[0]


def test_rebuild_keeps_every_breather_and_the_list_reads_them(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        now = book.now()
        kept = assert_kept_rows_true(book, now)
        assert set(kept) == {t.upper() for t in tags(book)}
        with_lives = [r for r in kept.values() if r.median_life_d is not None]
        assert with_lives  # the demo's breathers told how spent their desiccant was


def test_a_save_keeps_the_swapped_breather_and_moves_the_mark(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        tag, by = tags(book)[0], first_tech(book)
        before = breathercache.kept_records(book, book.now())[tag.upper()]
        logged = record.log(book, swap_of(book, tag, by, book.now() - timedelta(hours=1)))
        kept = assert_kept_rows_true(book, book.now())
        assert set(kept) == {t.upper() for t in tags(book)}  # all still kept after the save
        assert kept[tag.upper()] != before
        assert kept[tag.upper()].last_at == logged.at
        record.log(book, Void(voids=logged.id, note="wrong breather", by=by))
        kept = assert_kept_rows_true(book, book.now())
        assert kept[tag.upper()] == before


def test_entries_written_past_the_hooks_are_not_hidden(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        tag, by = tags(book)[1], first_tech(book)
        unit = book.conn.execute("SELECT unit FROM breathers WHERE tag = ?", [tag]).fetchone()[0]
        swap_id = book.conn.execute(
            "SELECT id FROM entries WHERE kind = 'breather' AND breather = ? "
            "ORDER BY at_utc DESC LIMIT 1",
            [tag],
        ).fetchone()[0]
        at = format_utc(book.now() - timedelta(hours=2))
    conn = sqlite3.connect(demo, isolation_level=None)  # another program: no kept row touched
    conn.execute(
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, breather, unit, reason, "
        "condition) VALUES ('00000000-0000-4000-8000-0000000000c1', ?, ?, 'breather', ?, ?, ?, "
        "'interval', 'spent')",
        [at, at, by, tag, unit],
    )
    conn.close()
    with open_book(demo, create=False) as book:
        kept = assert_kept_rows_true(book, book.now())
        assert tag.upper() not in kept  # computed: its kept row does not know the swap
        shown = {b.breather: b for b in views.watch(book).breathers}
        assert shown[tag].forecast.last_condition == "spent"
    conn = sqlite3.connect(demo, isolation_level=None)
    conn.execute(
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, voids, note) VALUES "
        "('00000000-0000-4000-8000-0000000000c2', ?, ?, 'void', ?, ?, 'typed twice')",
        [at, at, by, swap_id],
    )
    conn.close()
    with open_book(demo, create=False) as book:
        assert tag.upper() not in assert_kept_rows_true(book, book.now())
        # the next save brings the mark up and keeps the breathers those entries touched
        other = tags(book)[0]
        record.log(book, swap_of(book, other, by, book.now() - timedelta(minutes=5)))
        kept = assert_kept_rows_true(book, book.now())
        assert {tag.upper(), other.upper()} <= set(kept)


def test_a_swap_dated_ahead_counts_from_its_time_on(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        tag, by = tags(book)[0], first_tech(book)
        end = book.now()
        record.log(book, swap_of(book, tag, by, end + timedelta(hours=12), "spent"))
        assert tag.upper() in assert_kept_rows_true(book, end)  # not yet read: still held
        later = end + timedelta(hours=13)
        assert tag.upper() not in breathercache.kept_records(book, later)
        book.set_setting("clock", format_utc(later))
        assert_kept_rows_true(book, later)
        shown = {b.breather: b for b in views.watch(book).breathers}
        assert shown[tag].forecast.last_swap == end + timedelta(hours=12)
        record.refresh_stale(book)  # the app's catch-up reads it again at this clock
        assert tag.upper() in assert_kept_rows_true(book, later)


def test_a_clock_set_back_before_a_row_reads_the_swaps(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        end = book.now()
        swaps = book.conn.execute(
            "SELECT at_utc FROM entries WHERE kind = 'breather' ORDER BY at_utc DESC LIMIT 1"
        ).fetchone()[0]
        assert breathercache.kept_records(book, end - timedelta(days=400)) == {}
        book.set_setting("clock", swaps)  # back to the last swap: the rows read beyond it
        assert breathercache.kept_records(book, book.now()) == {}
        assert_kept_rows_true(book, book.now())


def test_another_row_format_or_a_hand_edit_is_computed(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        tag, by = tags(book)[0], first_tech(book)
        book.conn.execute("UPDATE breather_cache SET median_life_d = 'x' WHERE breather = ?", [tag])
        kept = assert_kept_rows_true(book, book.now())
        assert tag.upper() not in kept and len(kept) == len(tags(book)) - 1
        book.conn.execute("UPDATE breather_seen SET format = 'older'")
        assert breathercache.kept_records(book, book.now()) == {}
        assert_kept_rows_true(book, book.now())
        # a save with no mark of this format keeps every breather again
        record.log(book, swap_of(book, tags(book)[1], by, book.now() - timedelta(minutes=1)))
        assert set(assert_kept_rows_true(book, book.now())) == {t.upper() for t in tags(book)}


def test_a_book_without_rows_reads_the_swaps_and_the_first_save_keeps_them(
    demo_file: Path, tmp_path: Path
) -> None:
    path = tmp_path / "plain.db"
    path.write_bytes(demo_file.read_bytes())  # loaded from demo.db.sql: nothing kept yet
    with open_book(path, create=False) as book:
        assert book.conn.execute("SELECT count(*) FROM breather_seen").fetchone()[0] == 0
        assert breathercache.kept_records(book, book.now()) == {}
        assert_kept_rows_true(book, book.now())
        tag, by = tags(book)[0], first_tech(book)
        record.log(book, swap_of(book, tag, by, book.now() - timedelta(minutes=1)))
        assert set(assert_kept_rows_true(book, book.now())) == {t.upper() for t in tags(book)}


def test_kept_rows_hold_at_every_clock_they_claim(demo: Path) -> None:
    # Rows kept at the demo's end, read at clocks around every swap and void date from there
    # to a year on: a row either stands aside or gives what the swaps give then.
    with open_book(demo, create=False) as book:
        by, end = first_tech(book), book.now()
        for i, tag in enumerate(tags(book)):
            record.log(book, swap_of(book, tag, by, end + timedelta(hours=3 + i), "1/2 spent"))
        clocks = [end + timedelta(hours=h) for h in (0, 2.99, 3, 3.5, 4, 5, 8, 24 * 365)]
        for now in clocks:
            kept = breathercache.kept_records(book, now)
            computed = breathercache.computed(book, now, None)
            for tag, rec in kept.items():
                assert rec == computed.get(tag, NO_SWAPS), (
                    tag,
                    now,
                )


def test_a_schema_8_book_upgrades_and_reads_as_before(demo: Path, tmp_path: Path) -> None:
    path = tmp_path / "v8.db"
    path.write_bytes(demo.read_bytes())
    with open_book(path, create=False) as book:
        before = views.watch(book)
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript(drop_tables_after(8) + "PRAGMA user_version = 8;")
    conn.close()
    with open_book(path, create=False) as book:  # upgraded as it opens: no row kept yet
        assert book.conn.execute("SELECT count(*) FROM breather_cache").fetchone()[0] == 0
        assert views.watch(book) == before
        tag, by = tags(book)[0], first_tech(book)
        record.log(book, swap_of(book, tag, by, book.now() - timedelta(minutes=1)))
        assert set(assert_kept_rows_true(book, book.now())) == {t.upper() for t in tags(book)}


def test_a_refresh_with_nothing_to_do_takes_no_write_lock(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        book.conn.execute("PRAGMA busy_timeout = 0")  # a wait for the lock fails at once
        writer = sqlite3.connect(demo, isolation_level=None)
        writer.execute("BEGIN IMMEDIATE")  # another program holds the write lock
        try:
            breathercache.refresh(book)  # every row holds: nothing to write, no lock asked
        finally:
            writer.execute("ROLLBACK")
            writer.close()
        book.conn.execute(
            "DELETE FROM breather_cache WHERE rowid IN (SELECT min(rowid) FROM breather_cache)"
        )
        breathercache.refresh(book)
        assert set(assert_kept_rows_true(book, book.now())) == {t.upper() for t in tags(book)}
