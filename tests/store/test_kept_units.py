"""A unit's kept row read back: what a status is worked out from, read straight from the row
(`UnitInputs.from_row`, no TopUp built), is the clock's own (`UnitClock.inputs`), whenever the
clock was taken, and the statuses worked out from either are the same at later clocks."""

from __future__ import annotations

import json
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path

from store.db.book import open_book
from store.health import fluidcare, status_model
from store.health.fluidcare import Fill
from store.health.units import unit_at, unit_clock, unit_status_from
from store.ledger.entries import TopUp
from store.ledger.register import FilterPosition, Unit, list_all

# where each unit's kept entries are taken (back from the demo's end: the windows of top-up
# use and filtration hold different top-ups), and how long after that they are read
BACK = [timedelta(0), timedelta(days=9, hours=5), timedelta(days=33), timedelta(days=120)]
LATER = [
    timedelta(0),
    timedelta(hours=7),
    timedelta(days=2),
    timedelta(weeks=3),
    timedelta(days=400),
]


def test_a_kept_row_reads_back_as_the_clock_s_inputs(live: Path) -> None:
    with open_book(live, create=False) as book:
        end = book.now()
        units = list_all(book, Unit)
        by_unit: dict[str, list[FilterPosition]] = {}
        for position in list_all(book, FilterPosition):
            by_unit.setdefault(position.unit.upper(), []).append(position)
        fills, statuses = 0, set()
        for back in BACK:
            taken = end - back
            for unit in units:
                clock = unit_clock(book, unit, taken)
                row = json.loads(json.dumps(clock.to_row(), ensure_ascii=False))  # as kept
                read = status_model.UnitInputs.from_row(row)
                assert read == clock.inputs(), unit.tag
                assert repr(read) == repr(clock.inputs()), unit.tag  # the same time zones too
                assert all(type(f) is Fill for f in read.fills)
                fills += len(read.fills)
                filters = by_unit.get(unit.tag.upper(), [])
                for later in LATER:
                    status = unit_status_from(unit, filters, read, taken + later)
                    assert status == unit_at(unit, filters, clock, taken + later)
                    statuses.add((unit.tag, status.flags, status.consumption))
    assert fills  # the demo's units have top-ups in their kept rows
    assert len(statuses) > 2 * len(units)  # and the clocks do move their statuses


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
    as_fill = Fill(datetime(2026, 3, 1, tzinfo=UTC), 20.0, finest + 7, None)
    assert fluidcare.filtration_problem(as_fill, finest) == fluidcare.filtration_problem(
        coarse, finest
    )
