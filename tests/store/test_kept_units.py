"""A unit's kept row read back: the top-ups filled in directly are the objects `TopUp(...)`
builds, and the shortcuts of the unit status read the same as the long way."""

from __future__ import annotations

import json
from dataclasses import fields, replace
from pathlib import Path

from store.db.book import open_book
from store.health import fluidcare, status_model
from store.health.units import unit_clock
from store.ledger import journal
from store.ledger.entries import TopUp
from store.ledger.register import FilterPosition, Unit, list_all


def _by_constructor(row: dict, unit: str) -> tuple[TopUp, ...]:
    return tuple(
        TopUp(id=i, at=status_model.parse_stamp(at), unit=unit, volume_l=v, filtered_um=um, hours=h)
        for i, at, v, um, h in row["topups"]
    )


def test_kept_top_ups_are_the_constructor_s_objects(live: Path) -> None:
    assert TopUp in journal._FIELD_NAMES  # else the constructor builds them: this proves nothing
    with open_book(live, create=False) as book:
        now = book.now()
        units = list_all(book, Unit)
        seen = 0
        for unit in units:
            row = json.loads(json.dumps(unit_clock(book, unit, now).to_row()))  # as kept
            made = status_model.UnitClock.from_row(row, unit.tag).topups
            expected = _by_constructor(row, unit.tag)
            assert made == expected
            assert [repr(t) for t in made] == [repr(t) for t in expected]
            assert [list(vars(t).items()) for t in made] == [
                list(vars(t).items()) for t in expected
            ]
            assert all(
                type(t) is TopUp and hash(t) == hash(e) for t, e in zip(made, expected, strict=True)
            )
            seen += len(made)
    assert seen  # the demo's units have top-ups in their kept rows


def test_a_top_up_with_a_field_more_falls_back_to_its_constructor(monkeypatch) -> None:
    # the shortcut is taken only while the values name exactly TopUp's fields, in order
    names = [f.name for f in fields(TopUp)]
    assert list(status_model._TOPUP_BLANK) == names
    row = {"topups": [["a" * 8, "2026-01-02T03:04:05Z", 12.0, None, 7.0]]}
    some = {"id": "b" * 8, "at": status_model.parse_stamp("2026-01-02T03:04:05Z"), "unit": "U1",
            "volume_l": 3.0, "filtered_um": 10.0, "hours": None}  # fmt: skip
    assert journal.filled_entry(TopUp, some) == TopUp(**some)  # not every field: constructor
    monkeypatch.setattr(journal, "_FIELD_NAMES", {})  # as for a class that is not plain
    assert status_model._kept_topups(row["topups"], "U1") == _by_constructor(row, "U1")


def test_the_finest_rating_and_the_filtration_problem(live: Path) -> None:
    # common practice, no source: a top-up filtered coarser than the unit's finest filter,
    # or not at all, brings dirt in; the finest rating is the smallest one given
    with open_book(live, create=False) as book:
        positions = list_all(book, FilterPosition)
    rated = [p for p in positions if p.rating_um][:3]
    assert rated
    finest = min(p.rating_um for p in rated)
    assert fluidcare.finest_rating_um(rated) == finest
    assert fluidcare.finest_rating_um([replace(p, rating_um=None) for p in rated]) is None
    assert fluidcare.finest_rating_um([]) is None
    coarse = TopUp(unit="U1", volume_l=20.0, filtered_um=finest + 7)
    fine = TopUp(unit="U1", volume_l=20.0, filtered_um=finest)
    bare = TopUp(unit="U1", volume_l=20.0)
    assert f"coarser than the unit's finest filter ({finest:g} µm)" in (
        fluidcare.filtration_problem(coarse, finest) or ""
    )
    assert fluidcare.filtration_problem(fine, finest) is None
    assert "unfiltered" in (fluidcare.filtration_problem(bare, None) or "")
    assert fluidcare.filtration_problem(coarse, None) is None  # no rating: nothing to compare
