"""The round (store/rounds.py): who is on it and why, in walking order; CSV; skips."""

from __future__ import annotations

import csv
import io
import shutil

import pytest

from store import rounds, views
from store.base.errors import BookError
from store.db.book import open_book


@pytest.fixture
def demo_copy(demo_file, tmp_path, monkeypatch):
    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())
    return path


def test_the_next_shift_round_is_in_walking_order_with_reasons(demo_copy):
    with open_book(demo_copy, create=False) as book:
        now = book.now()
        plan = rounds.plan_round(book, following=True)
        statuses = {f.filter: f for f in views.watch(book).filters}
    assert plan.span.start >= now
    keys = [(s.unit.upper(), s.filter.upper()) for s in plan.stops]
    assert keys and keys == sorted(keys)
    on = {s.filter for s in plan.stops}
    for tag, f in statuses.items():
        why = rounds.why_on_round(f, plan.span.end)
        assert (tag in on) == bool(why)
        # every filter whose next reading falls before the shift ends is on the round
        if f.next_reading is not None and f.next_reading < plan.span.end:
            assert tag in on
    for s in plan.stops:
        assert s.reads[0] == ("ΔP gauge" if s.gauge else "indicator")
        assert "temperature" in s.reads


def test_csv_for_a_clipboard(demo_copy):
    with open_book(demo_copy, create=False) as book:
        plan = rounds.plan_round(book, following=True)
        text = rounds.round_csv(plan, book.local_zone())
    rows = list(csv.DictReader(io.StringIO(text)))
    assert [r["filter"] for r in rows] == [s.filter for s in plan.stops]
    assert all(r["value"] == "" for r in rows)  # left blank for the pen
    assert rounds._cell("=1+1") == "'=1+1"  # no formula runs in a spreadsheet


def test_a_skip_note_reads_back_and_needs_a_reason(demo_copy):
    with open_book(demo_copy, create=False) as book:
        stop = rounds.plan_round(book, following=True).stops[0]
    note = rounds.skip_note(stop, "  unit stopped for a mould change ", "AK")
    assert note.unit == stop.unit
    assert rounds.parse_skip(note.note) == (stop.filter, "unit stopped for a mould change")
    assert rounds.parse_skip("a plain note") is None
    with pytest.raises(BookError):
        rounds.skip_note(stop, "   ", "AK")
