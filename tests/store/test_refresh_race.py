"""A kept status never holds an older view of the entries than the moment it is stored: a
reading saved by another connection while `refresh` fits is in the row it keeps."""

from __future__ import annotations

from datetime import timedelta

from store import record
from store.db.book import open_book
from store.derived import statuscache
from store.health.conditions import context
from store.ledger.entries import Reading
from tests.kit.plant import CLOCK, build_plant


def _kept(book, tag):
    return statuscache.kept_filters(book, [tag], book.now())[tag]


def test_a_reading_saved_while_refresh_fits_is_in_the_kept_row(tmp_path, monkeypatch):
    path = tmp_path / "race.db"
    with open_book(path) as book:
        build_plant(book)
    with (
        open_book(path, clock=lambda: CLOCK) as book,
        open_book(path, clock=lambda: CLOCK) as other,
    ):
        before = statuscache.refresh(book, context(book, "P2-RF"))
        real = statuscache.live_status
        calls = []

        def fit_then_another_writer_saves(on, *args, **kwargs):
            out = real(on, *args, **kwargs)
            if on is book:  # the other writer's own refresh is not counted
                calls.append(out)
                if len(calls) == 1:  # the first fitting, before refresh takes the write lock
                    # a reading just under the 3.5 bar bypass setting: one nobody may lose
                    reading = Reading(filter="P2-RF", dp_bar=3.4, temp_c=44, by="AB",
                                      at=CLOCK - timedelta(minutes=30))  # fmt: skip
                    record.log(other, reading)
            return out

        monkeypatch.setattr(statuscache, "live_status", fit_then_another_writer_saves)
        stored = statuscache.refresh(book, context(book, "P2-RF"))
        monkeypatch.undo()

        kept = _kept(book, "P2-RF")
        fresh = statuscache.live_status(book, context(book, "P2-RF"))[0]
        assert kept.readings_since_change == before.readings_since_change + 1
        assert kept.reading_at == fresh.reading_at == CLOCK - timedelta(minutes=30)
        assert kept.dp_bar == fresh.dp_bar == 3.4
        assert stored.flags == kept.flags == fresh.flags
        assert len(calls) == 2  # fitted again under the lock


def test_no_write_in_between_fits_once(tmp_path, monkeypatch):
    path = tmp_path / "calm.db"
    with open_book(path) as book:
        build_plant(book)
    with open_book(path, clock=lambda: CLOCK) as book:
        real = statuscache.live_status
        calls = []
        monkeypatch.setattr(
            statuscache, "live_status", lambda *a, **k: calls.append(1) or real(*a, **k)
        )
        statuscache.refresh(book, context(book, "P1-RF"))
        assert len(calls) == 1
