"""The breathers of the watch list read lean: `journal.live_swap_marks` reads only what a
breather's forecast needs of the live swaps (when, the desiccant as found). It must give what the
live swaps built as full entries (`full_swaps`, through the journal's own entry reader) give: the same swaps in the same order,
the same rows noted as unreadable, and so the same breather statuses, now and as of earlier
times, with a voided swap, a void dated later than the time asked, unreadable rows (one of
them voided) and for one unit.
"""

from __future__ import annotations

import sqlite3
from datetime import timedelta
from pathlib import Path

import pytest

from store import record, views
from store.base.timeutil import format_utc, parse_utc
from store.db.book import open_book
from store.health import status_json, watchlist
from store.health.fluidcare import swap_record
from store.ledger import journal
from store.ledger.entries import BreatherSwap, Void
from store.ledger.register import Breather, list_all
from tests.kit.kept_demo import kept_copy

# Rows stored past the schema's checks (as a hand edit could): a blob where a text belongs,
# a written-at stamp that is no stamp; the last is voided, so it is left out without a word.
BAD = {
    "00000000-0000-4000-8000-0000000000b1": ("x'00ff'", "'2026-11-20T08:00:00Z'"),
    "00000000-0000-4000-8000-0000000000b2": ("'1/3 spent'", "'yesterday'"),
    "00000000-0000-4000-8000-0000000000b3": ("x'00ff'", "'2026-11-20T08:00:00Z'"),
}


@pytest.fixture
def demo(demo_file: Path, tmp_path: Path) -> Path:
    """The demo with its caches made; the writes the tests make keep them."""
    return kept_copy(demo_file, tmp_path)


def full_swaps(book, until=None) -> dict[str, list]:
    """Every breather's swaps built as full entries by the journal's reader (the reference)."""
    params = []
    sql = journal._SELECT
    if until is not None:
        sql += " AND v.at_utc < ?"
        params.append(format_utc(until))
    sql += " WHERE e.breather IS NOT NULL AND e.kind = 'breather'"
    if until is not None:
        sql += " AND e.at_utc < ?"
        params.append(format_utc(until))
    sql += " ORDER BY e.breather, e.at_utc, e.rowid"
    out: dict[str, list] = {}
    for entry in journal.entries_from_rows(book, book.conn.execute(sql, params).fetchall()):
        out.setdefault(entry.breather.upper(), []).append(entry)
    return out


def full_way(book, now, unit=None):
    """The breathers' statuses from swaps built as full entries (the reference)."""
    until = now + timedelta(seconds=1)
    swaps = full_swaps(book, until)
    out = [
        watchlist.breather_status_from(
            b,
            swap_record([e for e in swaps.get(b.tag.upper(), []) if not e.voided]),  # type: ignore[misc]
            now,
        )
        for b in list_all(book, Breather, unit)
    ]
    return sorted(out, key=lambda s: s.urgency)


def assert_same(book, now, unit=None) -> None:
    until = now + timedelta(seconds=1)
    for bound in (until, None):
        book.unreadable.clear()
        full = {
            tag: live
            for tag, swaps in full_swaps(book, bound).items()
            if (live := [(e.at, e.condition) for e in swaps if not e.voided])  # type: ignore[attr-defined]
        }
        noted_full = dict(book.unreadable)
        book.unreadable.clear()
        lean = {
            tag: [(m.at, m.condition) for m in marks]
            for tag, marks in journal.live_swap_marks(book, bound).items()
        }
        assert lean == full
        assert list(lean) == list(full)
        assert dict(book.unreadable) == noted_full
    assert watchlist.breathers_at(book, now, unit) == full_way(book, now, unit)


def swap_times(book) -> list:
    rows = book.conn.execute(
        "SELECT at_utc FROM entries WHERE kind = 'breather' ORDER BY at_utc"
    ).fetchall()
    return [parse_utc(r[0]) for r in rows]


def test_lean_swaps_equal_full_entries_at_several_clocks(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        times = swap_times(book)
        assert len(times) >= 5  # the comparison needs several swaps per breather
        clocks = [times[1], times[len(times) // 2] - timedelta(seconds=1), times[-1]]
        clocks += [book.now(), book.now() + timedelta(days=7), book.now() + timedelta(days=400)]
        for now in clocks:
            assert_same(book, now)
        units = [u for (u,) in book.conn.execute("SELECT unit FROM breathers ORDER BY tag")]
        assert_same(book, book.now(), units[0])


def test_a_voided_swap_counts_only_before_its_void(demo: Path) -> None:
    with open_book(demo, create=False) as book:
        end = book.now()
        book.set_setting("clock", format_utc(end + timedelta(days=3)))
        tech = book.conn.execute("SELECT tag FROM technicians ORDER BY tag").fetchone()[0]
        swap_id, tag = book.conn.execute(
            "SELECT id, breather FROM entries WHERE kind = 'breather' ORDER BY at_utc DESC LIMIT 1"
        ).fetchone()
        later = end + timedelta(days=1)
        record.log(book, Void(voids=swap_id, note="wrong breather", by=tech, at=later))
        record.log(
            book,
            BreatherSwap(
                breather=tag, condition="2/3 spent", by=tech, at=later + timedelta(hours=1)
            ),
        )
        before = {s.breather: s for s in watchlist.breathers_at(book, end)}
        after = {s.breather: s for s in watchlist.breathers_at(book, later + timedelta(hours=2))}
        assert before[tag].forecast.last_swap != after[tag].forecast.last_swap
        for now in (end, later - timedelta(seconds=1), later + timedelta(hours=2)):
            assert_same(book, now)
        # The watch list now (kept rows, at the clock set above) gives the same breathers.
        shown = views.watch(book)
        assert shown.breathers == tuple(full_way(book, shown.as_of))


def test_unreadable_swaps_are_noted_as_before(demo: Path) -> None:
    conn = sqlite3.connect(demo, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")  # as a hand-made edit could
    tag, unit = conn.execute("SELECT tag, unit FROM breathers ORDER BY tag").fetchone()
    for entry_id, (condition, logged) in BAD.items():
        conn.execute(
            "INSERT INTO entries (id, at_utc, logged_utc, kind, by, breather, unit, condition) "
            f"VALUES (?, '2026-11-20T08:00:00Z', {logged}, 'breather', 'AK', ?, ?, {condition})",
            [entry_id, tag, unit],
        )
    conn.execute(  # readable, with no condition said (NULL, read back as "")
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, breather, unit) VALUES "
        "('00000000-0000-4000-8000-0000000000b5', '2026-11-22T08:00:00Z', "
        "'2026-11-22T08:00:00Z', 'breather', 'AK', ?, ?)",
        [tag, unit],
    )
    voided = list(BAD)[-1]
    conn.execute(
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, voids, note) VALUES "
        "('00000000-0000-4000-8000-0000000000b4', '2026-11-21T08:00:00Z', "
        "'2026-11-21T08:00:00Z', 'void', 'AK', ?, 'typed by hand')",
        [voided],
    )
    conn.close()
    with open_book(demo, create=False) as book:
        now = book.now() + timedelta(days=7)
        assert_same(book, now)
        book.unreadable.clear()
        watchlist.breathers_at(book, now)
        assert set(book.unreadable) == set(list(BAD)[:2])  # the voided one left out unsaid
        assert_same(book, book.now(), unit)
        assert status_json.to_json(views.watch(book, as_of=now)) == status_json.to_json(
            watchlist.watch_as_of(book, now)
        )
