"""Time-proof status: the kept rows hold at any later time, and reads never write.

The demo plant with its clock moved on a day, a week and a year (a plant back from a
shutdown week; a book opened after a long pause): each kept row, read at that clock, must be
the status computed from the entries alone (`watchlist.watch_as_of`, which reads nothing kept),
flag by flag and date by date; a row whose inputs moved since it was kept (an entry or void
written behind the save hooks, the register changed in or outside sumpbook, a like
position's element change, another row format) is never used by any reader; and reading must
leave the file as it was, whether the caches are filled or missing.
"""

from __future__ import annotations

import hashlib
import os
import stat
from collections.abc import Iterator
from dataclasses import replace
from datetime import timedelta
from pathlib import Path

import pytest

from store import record, sheets, views
from store.db.book import open_book
from store.derived import statuscache
from store.forecast.life import WeibullFit
from store.health import status_json, status_model, watchlist
from store.health.conditions import contexts
from store.ledger.entries import ElementChange, Reading, Void
from store.ledger.register import Unit, list_all
from tests.kit.agree import exact
from tests.kit.kept_demo import behind_the_hooks, kept_demo, moved, pooling

LATER = [timedelta(0), timedelta(days=1, hours=3), timedelta(weeks=1), timedelta(days=365)]


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def kept(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Path]:
    yield kept_demo(tmp_path_factory.mktemp("timeproof"))


@pytest.mark.parametrize("later", LATER, ids=["now", "next-day", "a-week", "a-year"])
def test_kept_rows_give_the_full_computation_later_on(kept: Path, tmp_path: Path, later) -> None:
    # Each kept row, read at the clock, against the status computed at that clock from the
    # entries (`watchlist.watch_as_of` reads no kept row and no element summary), directly.
    path = moved(kept, tmp_path, later)
    with open_book(path, create=False) as book:
        assert statuscache.stale_filters(book) == []  # no row is too old to use
        now = book.now()
        fresh = watchlist.watch_as_of(book, now)
        tags = [f.filter.upper() for f in fresh.filters]
        rows = statuscache.kept_filters(book, tags, now)
        assert sorted(rows) == sorted(tags)  # every row holds, and is read
        by_unit = watchlist.plant(book).positions_by_unit
        units = statuscache.kept_units(book, list_all(book, Unit), by_unit, now)
        cached = views.watch(book)
    assert len(units) == len(fresh.units)
    for full in fresh.filters:
        quick = rows[full.filter.upper()]
        assert quick.flags == full.flags, quick.filter
        assert quick.notes == full.notes, quick.filter
        assert (quick.state, quick.basis) == (full.state, full.basis), quick.filter
        assert (quick.due, quick.bypass_due) == (full.due, full.bypass_due), quick.filter
        assert quick.element_age_h == full.element_age_h, quick.filter
        assert quick == replace(full, history=()), quick.filter  # no kept row has the history
        assert statuscache._encode(quick) == statuscache._encode(full), quick.filter
    assert [units[u.unit.upper()] for u in fresh.units] == list(fresh.units)
    assert [f.filter for f in cached.filters] == [f.filter for f in fresh.filters]
    assert cached.units == fresh.units
    assert cached.breathers == fresh.breathers
    assert status_json.to_json(cached) == status_json.to_json(fresh)


DERIVED = ("element_state", "element_cache", "status_cache", "unit_cache")


def bare(path: Path, tmp_path: Path) -> Path:
    """A copy of the book with every derived row dropped: what remains is the entries and the
    register, so whatever is read from it is computed from them."""
    copy = tmp_path / "bare.db"
    copy.write_bytes(path.read_bytes())
    with open_book(copy, create=False) as book:
        with book.atomic():
            for table in DERIVED:
                book.conn.execute(f"DELETE FROM {table}")
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return copy


@pytest.mark.parametrize("later", LATER, ids=["now", "next-day", "a-week", "a-year"])
def test_kept_rows_equal_a_computation_from_the_entries_alone(
    kept: Path, tmp_path: Path, later
) -> None:
    # The comparison above holds the cache against `watch(as_of=...)`, which may itself use
    # kept rows where they stand; here the reference has no kept row to lean on at all.
    path = moved(kept, tmp_path, later)
    with open_book(path, create=False) as book:
        cached = views.watch(book)
    with open_book(bare(path, tmp_path), create=False) as book:
        for table in DERIVED:
            assert book.conn.execute(f"SELECT count(*) FROM {table}").fetchone()[0] == 0
        fresh = views.watch(book, as_of=book.now())
    assert [f.filter for f in cached.filters] == [f.filter for f in fresh.filters]
    for quick, full in zip(cached.filters, fresh.filters, strict=True):
        assert statuscache._encode(quick) == statuscache._encode(full), quick.filter
    assert status_json.to_json(cached) == status_json.to_json(fresh)


def test_the_clock_parts_do_move_on_the_demo(kept: Path, tmp_path: Path) -> None:
    # The comparison above is worth something only if the clock's parts change between the
    # end of the story and a week later: overdue readings, check-now, element ages, hot.
    with open_book(kept, create=False) as book:
        then = views.watch(book)
    with open_book(moved(kept, tmp_path, timedelta(weeks=1)), create=False) as book:
        week = views.watch(book)
    flags = {f.filter: f.flags for f in then.filters}
    assert any(f.flags != flags[f.filter] for f in week.filters)
    assert sum("reading-overdue" in f.flags for f in week.filters) > sum(
        "reading-overdue" in f.flags for f in then.filters
    )
    assert {f.filter: f.element_age_h for f in week.filters} != {
        f.filter: f.element_age_h for f in then.filters
    }


def test_a_clock_set_back_before_the_rows_were_kept_computes_them(
    kept: Path, tmp_path: Path
) -> None:
    # A laptop's clock corrected backwards, two days before the end of the story: a row
    # kept at the later clock may hold readings dated after the earlier one, and its clock
    # parts hold only from when it was kept (status_model.at_time). Each filter is then
    # computed, as statuscache.live_status computes it at that clock.
    path = moved(kept, tmp_path, timedelta(days=-2))
    with open_book(path, create=False) as book:
        now = book.now()
        listed = {f.filter: f for f in views.watch(book).filters}
        ctxs = contexts(book)
        computed = {tag: statuscache.live_status(book, ctx, now)[0] for tag, ctx in ctxs.items()}
        rows = statuscache._kept_rows(book, lean=True)
        as_kept = {tag: statuscache._from_lean(row.cols, now) for tag, row in rows.items()}
    assert sorted(listed) == sorted(computed)
    for tag, full in computed.items():
        assert exact(listed[tag]) == exact(full), tag
    # ... which matters: read at that clock, most kept rows would not be the computation
    differ = [t for t, full in computed.items() if exact(as_kept[t.upper()]) != exact(full)]
    assert len(differ) > len(computed) // 2


@pytest.mark.parametrize("caches", ["kept", "missing"])
def test_a_write_protected_book_reads_a_week_later_and_stays_byte_identical(
    kept: Path, tmp_path: Path, caches: str
) -> None:
    path = moved(kept, tmp_path, timedelta(weeks=1))
    if caches == "missing":  # a book whose caches were never made: computed in memory
        with open_book(path, create=False) as book:
            with book.atomic():
                for table in ("status_cache", "unit_cache", "element_cache", "element_state"):
                    book.conn.execute(f"DELETE FROM {table}")
            book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    with open_book(path, create=False) as book:
        expected = status_json.to_json(views.watch(book, as_of=book.now()))
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    before = digest(path)
    os.chmod(path, stat.S_IRUSR | stat.S_IRGRP | stat.S_IROTH)  # 0444
    try:
        with open_book(path, create=False) as book:  # (root may write it all the same)
            assert status_json.to_json(views.watch(book)) == expected
        with open_book(path, create=False, readonly=True) as book:
            assert status_json.to_json(views.watch(book)) == expected
            assert statuscache.refresh_stale(book) == []  # nothing to keep it in
    finally:
        os.chmod(path, stat.S_IRUSR | stat.S_IWUSR)
    assert digest(path) == before


def test_reads_on_a_writable_book_write_nothing(kept: Path, tmp_path: Path) -> None:
    # Writable, caches missing: the watch list and a filter sheet are computed in memory and
    # the derived tables stay empty until a write or an explicit refresh keeps them.

    path = moved(kept, tmp_path, timedelta(weeks=1))
    with open_book(path, create=False) as book:
        with book.atomic():
            for table in ("status_cache", "unit_cache", "element_cache", "element_state"):
                book.conn.execute(f"DELETE FROM {table}")
        views.watch(book)
        tag = book.conn.execute("SELECT tag FROM filters ORDER BY tag LIMIT 1").fetchone()[0]
        sheets.filter_sheet(book, tag)
        counts = [
            book.conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0]
            for t in ("status_cache", "unit_cache", "element_cache", "element_state")
        ]
        assert counts == [0, 0, 0, 0]
        done = statuscache.refresh_stale(book)  # the explicit refresh keeps them
        assert len(done) == book.conn.execute("SELECT count(*) FROM filters").fetchone()[0]
        assert statuscache.stale_filters(book) == []
        assert book.conn.execute("SELECT count(*) FROM unit_cache").fetchone()[0] > 0


@pytest.mark.parametrize("age_h", [0.0, 150.0, 2400.0, 40000.0])
@pytest.mark.parametrize("p", [0.05, 0.10, 0.50])
def test_the_numpy_free_remaining_life_is_the_weibull_fit_s(age_h: float, p: float) -> None:
    # The read path works out a service-life due given the age so far without numpy; it must
    # give what life.WeibullFit gives, to the last bit (same sums). Shape/scale invented.
    fit = WeibullFit(shape=1.7, scale_h=1900.0, n_failed=5, n_censored=2, log_likelihood=0.0)
    assert status_model.weibull_remaining_h(1.7, 1900.0, age_h, p) == fit.remaining_quantile_h(
        age_h, p
    )


@pytest.mark.parametrize("age_h", [-3.0, 0.0, 150.0, 2400.0, 40000.0])
def test_the_three_due_ages_are_the_remaining_lives_at_each_share(age_h: float) -> None:
    # A kept row's service-life due is dated from three ages worked out together (the
    # survival term once); each must be the age plus weibull_remaining_h at its share, to the
    # last bit, and so the WeibullFit's (the previous test). Shape/scale invented.
    ages = status_model._life_ages(1.7, 1900.0, age_h)
    assert list(ages) == [
        age_h + status_model.weibull_remaining_h(1.7, 1900.0, age_h, p)
        for p in status_model._LIFE_P
    ]


MOVES = ["reading", "void", "register", "outside-register", "like-change", "format"]


@pytest.mark.parametrize("move", MOVES)
def test_a_row_whose_inputs_moved_is_never_used(kept: Path, tmp_path: Path, move: str) -> None:
    # Each input of a kept row moved without the row being kept again: every reader (the list
    # now and as of now, one filter's status) computes that filter from the entries, and the
    # other rows still hold.
    path = moved(kept, tmp_path, timedelta(hours=2))
    with open_book(path, create=False) as book:
        now = book.now()
        tag, like = pooling(book)
        last = book.conn.execute(
            "SELECT id, at_utc FROM entries WHERE kind = 'reading' AND filter = ? "
            "ORDER BY at_utc DESC, rowid DESC LIMIT 1",
            [tag],
        ).fetchone()
        before = statuscache.kept_filters(book, [tag], now)[tag]
        if move == "reading":  # near the bypass setting: a reading nobody may lose
            bypass = book.conn.execute("SELECT bypass_bar FROM filters WHERE tag = ?", [tag])
            dp = 0.99 * bypass.fetchone()[0]
            behind_the_hooks(book, Reading(filter=tag, dp_bar=dp, temp_c=45.0, by="BM", at=now))
        elif move == "void":
            behind_the_hooks(book, Void(voids=last[0], by="BM", at=now, note="wrong gauge"))
        elif move == "register":  # through sumpbook: no kept row touched
            limit = book.conn.execute("SELECT limit_bar FROM filters WHERE tag = ?", [tag])
            register_update(book, tag, 0.9 * limit.fetchone()[0])
        elif move == "outside-register":  # another program, straight into the file
            with book.atomic():
                book.conn.execute("UPDATE units SET coldest_start_c = coldest_start_c - 5")
        elif move == "like-change":
            behind_the_hooks(book, ElementChange(filter=like, by="BM", at=now, reason="limit"))
        else:  # a row of another format (a field added since, a note reworded)
            with book.atomic():
                book.conn.execute(
                    "UPDATE status_cache SET key = 'old' || substr(key, 4) WHERE filter = ?",
                    [tag],
                )
        assert tag not in statuscache.kept_filters(book, [tag], now)
        assert tag not in statuscache.kept_as_of(book, [tag], now)
        assert tag in statuscache.stale_filters(book)
        fresh = watchlist.watch_as_of(book, now)
        shown, audit = views.watch(book), views.watch(book, as_of=now)
        ctx = [c for c in watchlist.plant(book).contexts if c.position.tag == tag][0]
        one = views.status_of(book, ctx)
    expected = {f.filter: statuscache._encode(f) for f in fresh.filters}
    assert {f.filter: statuscache._encode(f) for f in shown.filters} == expected
    assert {f.filter: statuscache._encode(f) for f in audit.filters} == expected
    assert statuscache._encode(one) == expected[tag]
    if move not in ("format", "outside-register"):  # what moved shows (not only the same)
        assert expected[tag] != statuscache._encode(before)
    if move != "outside-register":  # a unit's change moves every filter on it
        others = [f.filter.upper() for f in fresh.filters if f.filter.upper() != tag]
        with open_book(path, create=False) as book:
            held = statuscache.kept_filters(book, others, now)
        assert len(held) >= len(others) - 8  # like positions leaning on `like`, at most


def register_update(book, tag: str, limit_bar: float) -> None:
    from store.ledger import register
    from store.ledger.register import FilterPosition

    register.update(book, FilterPosition, tag, {"limit_bar": limit_bar}, by="BM")


def test_a_save_moves_every_untouched_row_on(kept: Path, tmp_path: Path) -> None:
    # After a save every row its entry leaves as it was is checked up to it, so a reader
    # compares only what comes after (the list at the speed of one query).
    path = moved(kept, tmp_path, timedelta(hours=2))
    with open_book(path, create=False) as book:
        tag = book.conn.execute("SELECT tag FROM filters ORDER BY tag LIMIT 1").fetchone()[0]
        record.log(book, Reading(filter=tag, dp_bar=0.4, temp_c=45.0, by="BM", at=book.now()))
        newest = book.conn.execute("SELECT max(rowid) FROM entries").fetchone()[0]
        seen = dict(
            book.conn.execute("SELECT tag, seen_rowid FROM kept_seen WHERE what = 'filter'")
        )
        stale = set(statuscache.stale_filters(book))
        assert {t for t, s in seen.items() if s == newest} == set(seen) - stale
        assert tag not in stale
