"""The watch list as of a past time, for the whole plant at once.

`views.watch(book, as_of=T)` reads the plant's readings and changes in one go; each filter's
row must be exactly what `watchlist.status_as_of(book, ctx, T)` gives, which reads that position's
entries alone as the book stood at T (entries dated before T, voided only by voids dated
before T). Checked on the demo plant at several times (at and just before element changes,
the middle and the end of its story), with voids and entries dated after T, and for one unit.
"""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path

import pytest

from store import record, views
from store.base.timeutil import format_utc, parse_utc
from store.db.book import open_book
from store.derived import elementcache, statuscache
from store.health import status_json, status_model, watchlist
from store.health.conditions import contexts
from store.health.units import unit_status
from store.ledger import journal
from store.ledger.entries import ElementChange, Reading, Void
from store.ledger.register import FilterPosition, list_all
from tests.kit.kept_demo import kept_copy


def by_position(book, now, unit=None) -> list[status_model.FilterStatus]:
    """Every filter's status at `now`, position by position (the per-filter computation)."""
    ctxs = [c for c in contexts(book).values() if unit is None or c.position.unit == unit]
    return sorted(
        (watchlist.status_as_of(book, c, now) for c in ctxs), key=lambda s: s.urgency(now)
    )


def computed_as_of(book, now, unit=None) -> status_model.Watch:
    """Every row computed from the entries as of `now`, from the element cache's summaries
    where they provably hold then (no kept status row)."""
    p = watchlist.plant(book, unit)
    changes = watchlist.changes_as_of(book, now)
    summaries, starts = elementcache.kept_before(
        book, p.contexts, changes, now + timedelta(seconds=1)
    )
    filters = watchlist.filters_as_of(
        book, p.contexts, list_all(book, FilterPosition), now, (changes, summaries, starts)
    )
    units = [unit_status(book, u, p.positions_by_unit.get(u.tag.upper(), []), now) for u in p.units]
    return watchlist.watch_list(now, filters, watchlist.breathers_at(book, now, unit), units)


def assert_same(book, now, unit=None) -> None:
    audit = computed_as_of(book, now, unit)  # every row computed
    plain = watchlist.watch_as_of(book, now, unit)  # ... and without the element cache
    assert status_json.to_json(plain) == status_json.to_json(audit)
    one_by_one = by_position(book, now, unit)
    assert [f.filter for f in audit.filters] == [f.filter for f in one_by_one]
    for fast, slow in zip(audit.filters, one_by_one, strict=True):
        # Every kept field (flags, notes, dates, the clock's parts), then what is not kept.
        assert statuscache._encode(fast) == statuscache._encode(slow), fast.filter
        assert fast.history == slow.history, fast.filter
        assert fast.forecast == slow.forecast, fast.filter
    expected = status_model.Watch(now, tuple(one_by_one), audit.breathers, audit.units)
    assert status_json.to_json(audit) == status_json.to_json(expected)
    # The list as `views.watch` gives it, kept rows standing in where their key holds for
    # the time: the same kept fields, units and JSON (a kept row has no reading history:
    # no watch list shows one).
    shown = views.watch(book, as_of=now, unit=unit)
    assert [statuscache._encode(f) for f in shown.filters] == [
        statuscache._encode(f) for f in one_by_one
    ]
    assert shown.units == audit.units
    assert status_json.to_json(shown) == status_json.to_json(expected)


@pytest.fixture
def demo(demo_file: Path, tmp_path: Path) -> Path:
    """The demo with its caches made; the writes the tests make keep them."""
    return kept_copy(demo_file, tmp_path)


def change_times(book) -> list:
    rows = book.conn.execute(
        "SELECT at_utc FROM entries WHERE kind = 'change' ORDER BY at_utc"
    ).fetchall()
    return [parse_utc(r[0]) for r in rows]


def test_whole_plant_as_of_equals_each_position_on_its_own(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        first, last = book.conn.execute("SELECT min(at_utc), max(at_utc) FROM entries").fetchone()
        start, end = parse_utc(first), parse_utc(last)
        changes = change_times(book)
        assert len(changes) > 10  # the comparison needs removed elements and pooled lives
        times = [start + (end - start) * share for share in (0.25, 0.5, 0.8)]
        times += [changes[len(changes) // 2], changes[len(changes) // 2] - timedelta(seconds=1)]
        times += [changes[-1], end, book.now()]
        for now in times:
            assert_same(book, now)


def test_voids_and_entries_dated_after_the_time_are_not_seen(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        end = book.now()
        book.set_setting("clock", format_utc(end + timedelta(days=3)))
        tech = book.conn.execute("SELECT tag FROM technicians ORDER BY tag").fetchone()[0]
        middle = change_times(book)[len(change_times(book)) // 2]
        change = book.conn.execute(
            "SELECT id, filter FROM entries WHERE kind = 'change' AND at_utc = ?",
            [format_utc(middle)],
        ).fetchone()
        reading = book.conn.execute(  # the newest reading: its element is still in service
            "SELECT id, filter FROM entries WHERE kind = 'reading' AND dp_bar IS NOT NULL "
            "ORDER BY at_utc DESC LIMIT 1"
        ).fetchone()
        later = end + timedelta(days=1)
        for target in (change, reading):
            record.log(book, Void(voids=target[0], note="wrong position", by=tech, at=later))
        record.log(
            book,
            Reading(
                filter=reading[1], dp_bar=0.9, temp_c=45, by=tech, at=later + timedelta(hours=1)
            ),
        )
        record.log(book, ElementChange(filter=change[1], by=tech, at=later + timedelta(hours=2)))
        # Before the voids both entries count; after them neither does.
        for now in (middle, end, later + timedelta(hours=3)):
            assert_same(book, now)
        seen = {f.filter: f for f in views.watch(book, as_of=end).filters}
        after = {f.filter: f for f in views.watch(book, as_of=later + timedelta(hours=3)).filters}
        assert seen[change[1]].changed_at != after[change[1]].changed_at
        assert seen[reading[1]].readings_since_change > 1
        assert seen[reading[1]].reading_at != after[reading[1]].reading_at


def test_one_unit_as_of(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        units = [u for (u,) in book.conn.execute("SELECT tag FROM units ORDER BY tag")]
        now = book.now() - timedelta(days=40)
        for unit in units[:3]:
            assert_same(book, now, unit)


def test_as_of_the_last_entry_equals_the_kept_status(demo: Path) -> None:
    # The whole-plant audit against the status cache kept by the write path (another route
    # through the same sums: element cache, entries since the last change).
    with open_book(demo, create=False) as book:
        kept, audit = views.watch(book), views.watch(book, as_of=book.now())
    assert status_json.to_json(kept) == status_json.to_json(audit)


def kept_before(book, now):
    until = now + timedelta(seconds=1)
    ctxs = list(contexts(book).values())
    return elementcache.kept_before(book, ctxs, journal.live_changes_until(book, until), until)[0]


def test_kept_summaries_are_used_only_where_they_hold(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        now = book.now()
        kept = kept_before(book, now)
        assert len(kept) >= 5  # the element cache kept by the writes is used
        # A reading slipped into an earlier element behind the write hooks (as a bulk load
        # would): the cache no longer holds for that position, which is read in full.
        tag = sorted(kept)[0]
        old = book.conn.execute(
            "SELECT id FROM entries WHERE kind = 'reading' AND upper(filter) = ? "
            "AND dp_bar IS NOT NULL AND at_utc < ? ORDER BY at_utc DESC LIMIT 1",
            [tag, format_utc(kept[tag][-1].removed_at)],
        ).fetchone()[0]
        with book.atomic():
            book.conn.execute(
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, filter, dp_bar, "
                "temp_c, note) SELECT 'aaaaaaaa-0000-4000-8000-000000000001', at_utc, "
                "logged_utc, kind, by, unit, filter, dp_bar * 3, temp_c, note FROM entries "
                "WHERE id = ?",
                [old],
            )
        assert tag not in kept_before(book, now)
        # And a void of a reading in an earlier element on another position, written behind
        # the hooks, dated before the time.
        other = sorted(kept)[1]
        target = book.conn.execute(
            "SELECT id FROM entries WHERE kind = 'reading' AND upper(filter) = ? "
            "AND dp_bar IS NOT NULL AND at_utc < ? ORDER BY at_utc DESC LIMIT 1",
            [other, format_utc(kept[other][-1].removed_at)],
        ).fetchone()[0]
        by = book.conn.execute("SELECT tag FROM technicians ORDER BY tag").fetchone()[0]
        with book.atomic():
            book.conn.execute(
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, voids, note) VALUES "
                "('aaaaaaaa-0000-4000-8000-000000000002', ?, ?, 'void', ?, ?, 'wrong gauge')",
                [
                    format_utc(now - timedelta(days=1)),
                    format_utc(now - timedelta(days=1)),
                    by,
                    target,
                ],
            )
        assert other not in kept_before(book, now)
        assert_same(book, now)
        assert_same(book, now - timedelta(days=2))
        assert_same(book, now - timedelta(days=20))
        # A book whose element cache was never made: everything from the entries.
        with book.atomic():
            for table in ("element_cache", "element_state"):
                book.conn.execute(f"DELETE FROM {table}")
        assert kept_before(book, now) == {}
        assert_same(book, now)


def fitted_again(monkeypatch) -> list[str]:
    """The filters `views.watch` computes from the entries from now on (no kept row stood)."""
    computed: list[str] = []
    real = watchlist.filters_as_of

    def spy(book, ctxs, *args):
        computed.extend(c.position.tag for c in ctxs)
        return real(book, ctxs, *args)

    monkeypatch.setattr(views, "filters_as_of", spy)
    return computed


def test_where_nothing_came_after_the_time_the_kept_rows_stand_in(demo, monkeypatch):
    # At the clock nothing is dated later: every filter's kept row stands for it (no fit);
    # a week back, readings came after: those filters are computed from the entries.
    computed = fitted_again(monkeypatch)
    with open_book(demo, create=False) as book:
        now = book.now()
        views.watch(book, as_of=now)
        assert computed == []
        views.watch(book, as_of=now - timedelta(days=7))
        assert computed
        monkeypatch.undo()
        assert_same(book, now)
        assert_same(book, now - timedelta(days=7))


def test_rows_kept_later_stand_for_an_earlier_time_their_inputs_reach(demo, monkeypatch):
    # The previous shift's log read after the shift: the kept rows were computed at the
    # book's clock, later than the time asked for. A filter whose inputs are all dated at or
    # before that time is not fitted again; one with a later input is. Either way the list
    # is the computation from the entries as they stood (assert_same).
    computed = fitted_again(monkeypatch)
    with open_book(demo, create=False) as book:
        (last,) = book.conn.execute("SELECT max(at_utc) FROM entries").fetchone()
        at = parse_utc(last)
        assert at < book.now()  # the rows were kept after the time asked for
        views.watch(book, as_of=at)
        assert computed == []
        # An hour before the newest entry: its filter (at least) came later.
        views.watch(book, as_of=at - timedelta(hours=1))
        assert 0 < len(computed) < len(contexts(book))
        monkeypatch.undo()
        assert_same(book, at)
        assert_same(book, at - timedelta(hours=1))
