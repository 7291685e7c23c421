"""A unit's kept row read back: what a status is worked out from, read straight from the row
(`UnitInputs.from_row`, no TopUp built), is the clock's own (`UnitClock.inputs`), whenever the
clock was taken; top-up use over those inputs is the rule as first written (every top-up
sorted into live, recent and earlier one list at a time), at any clock."""

from __future__ import annotations

import json
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from store.db.book import open_book
from store.health import fluidcare, status_model
from store.health.fluidcare import Consumption, Fill, topup_consumption
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


def _as_first_written(
    unit: Unit,
    fills: list[Fill],
    now: datetime,
    first: datetime | None,
    early_l: float,
    early_n: int,
) -> Consumption | None:
    # topup_consumption as it read before its top-ups were sorted in one pass: the live ones
    # up to now, the recent ones among them, the earlier ones added up in order
    live = [t for t in fills if t.at <= now]
    if not (live or early_n) or first is None:
        return None
    recent_start = now - timedelta(days=fluidcare.RECENT_DAYS)
    recent_live = [t for t in live if t.at > recent_start]
    recent_rate = sum([t.volume_l for t in recent_live]) / (fluidcare.RECENT_DAYS / 7)
    history_days = (recent_start - first).total_seconds() / 86400
    history_rate = None
    if history_days >= fluidcare.MIN_HISTORY_DAYS:
        earlier = early_l
        for t in live:
            if t.at <= recent_start:
                earlier += t.volume_l
        history_rate = earlier / (history_days / 7)
    per_100h = None
    with_hours = [t for t in recent_live if t.hours is not None] if unit.hour_meter else []
    if len(with_hours) >= 2:
        span_h = with_hours[-1].hours - with_hours[0].hours  # type: ignore[operator]
        if span_h > 0:
            per_100h = sum(t.volume_l for t in with_hours[1:]) / span_h * 100
    floor = 0.002 * (unit.reservoir_l or 100.0)
    rising = bool(
        history_rate is not None
        and recent_rate > floor
        and recent_rate > fluidcare.LEAK_FACTOR * max(history_rate, floor / fluidcare.LEAK_FACTOR)
    )
    note = f"{recent_rate:.1f} L/week over {fluidcare.RECENT_DAYS} days" + (
        f" against {history_rate:.1f} L/week before" if history_rate is not None else ""
    )
    return Consumption(recent_rate, history_rate, per_100h, rising, note)


START = datetime(2026, 1, 1, tzinfo=UTC)
DAY_S = 86400
# each top-up so many seconds before the clock's whole second: anywhere, or on the edges of
# the windows (the clock itself, four weeks back) and a second either side
_back_s = st.one_of(
    st.integers(-5 * DAY_S, 150 * DAY_S),
    st.sampled_from([0, -1, 1, 28 * DAY_S, 28 * DAY_S - 1, 28 * DAY_S + 1, 30 * DAY_S]),
)
_fill = st.tuples(
    _back_s,
    st.sampled_from([0.5, 1.0, 2.5, 5.0, 10.0, 12.3, 20.0, 40.0, 0.1]),
    st.sampled_from([None, 3.0, 10.0, 25.0]),
    st.one_of(st.none(), st.floats(0, 20000, allow_nan=False)),
)


@settings(max_examples=400, deadline=None)
@given(
    backs=st.lists(_fill, max_size=12),
    now_s=st.integers(0, 260 * DAY_S),
    micro=st.sampled_from([0, 0, 1, 500_000, 999_999]),
    first_d=st.one_of(st.none(), st.integers(-120, 60)),
    early=st.sampled_from([(0.0, 0), (0, 0), (35.0, 3), (0.30000000000000004, 2)]),
    meter=st.booleans(),
    reservoir=st.sampled_from([None, 60.0, 400.0]),
)
def test_top_up_use_is_the_rule_as_first_written(
    backs, now_s, micro, first_d, early, meter, reservoir
) -> None:
    # common practice, no source: the rule itself (recent four weeks against the unit's own
    # earlier rate) is checked on numbers in test_status.py; here, that the one-pass sort of
    # the top-ups gives the same figures to the last bit, at clocks between seconds too
    second = START + timedelta(seconds=now_s)
    fills = sorted(
        [Fill(second - timedelta(seconds=b), v, um, h) for b, v, um, h in backs],
        key=lambda t: t.at,
    )
    unit = Unit(tag="U1", name="unit", hour_meter=meter, reservoir_l=reservoir)
    now = second + timedelta(microseconds=micro)
    first = None if first_d is None else START + timedelta(days=first_d)
    got = topup_consumption(unit, fills, now, first, *early)
    assert got == _as_first_written(unit, fills, now, first, *early)
    assert repr(got) == repr(_as_first_written(unit, fills, now, first, *early))


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
