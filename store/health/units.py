"""A unit's status: its fluid-care entries as they stand at a time (`unit_clock`, what the
status cache keeps as `status_model.UnitClock`) and the windows of top-up use, top-up
filtration, the latest sample, water and hot readings laid over them at any later time
(`unit_at`)."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

from store.db.book import Book
from store.health.fluidcare import (
    filtration_problem,
    finest_rating_um,
    hot_readings,
    sample_verdict,
    topup_consumption,
)
from store.health.status_model import HOT_LOOKBACK, UnitClock, UnitInputs, UnitStatus
from store.ledger.journal import read
from store.ledger.register import FilterPosition, Unit

TOPUP_WINDOW = timedelta(days=30)  # a top-up's filtration is flagged this long


def unit_clock(book: Book, unit: Unit, now: datetime) -> UnitClock:
    """A unit's fluid-care entries as they stand at `now`."""
    until = now + timedelta(seconds=1)
    topups = [
        e
        for e in read(book, unit=unit.tag, kinds=["topup"], until=until, as_of=until)
        if not e.voided
    ]
    first = read(book, unit=unit.tag, until=until, limit=1)
    early = [t for t in topups if t.at < now - TOPUP_WINDOW]  # type: ignore[operator]
    early_l = 0  # as topup_consumption adds them up
    for t in early:
        early_l += t.volume_l  # type: ignore[attr-defined]
    newest = [
        e
        for e in read(
            book,
            unit=unit.tag,
            kinds=["sample"],
            until=until,
            as_of=until,
            newest_first=True,
            limit=5,
        )
        if not e.voided
    ]
    samples = [e for e in newest if e.code]  # type: ignore[attr-defined]
    water = next((e.water_ppm for e in newest if e.water_ppm is not None), None)  # type: ignore[attr-defined]
    sample = None
    if samples:
        verdict = sample_verdict(unit, samples[0])  # type: ignore[arg-type]
        sample = (verdict.code, verdict.text, verdict.meets)
    recent = [
        e
        for e in read(
            book,
            unit=unit.tag,
            kinds=["reading"],
            since=now - HOT_LOOKBACK,
            until=until,
            as_of=until,
        )
        if not e.voided
    ]
    return UnitClock(
        valid_from=now,
        first_at=first[0].at if first else None,
        early_l=early_l,
        early_n=len(early),
        topups=tuple(topups[len(early) :]),  # type: ignore[arg-type]
        sample=sample,
        hot=tuple(r.at for r in hot_readings(unit, recent)),  # type: ignore[arg-type, misc]
        water_ppm=water,
    )


# Water in mineral hydraulic oil above about 300 ppm is past what the oil holds dissolved near
# its working temperature: free water, rust, additive loss. # from memory (a usual alarm level;
# the fluid maker's figure rules)
WATER_LIMIT_PPM = 300.0


def water_flag(water_ppm: float | None) -> str | None:
    """The note of the water flag for the newest sample's water content, None under the limit."""
    if water_ppm is None or water_ppm <= WATER_LIMIT_PPM:
        return None
    return (
        f"latest sample holds {water_ppm:g} ppm water (over {WATER_LIMIT_PPM:g} ppm): find "
        "where it gets in (breather, seals, cooler, washdown) and dry or change the oil"
    )


def unit_at(
    unit: Unit, filters: Sequence[FilterPosition], clock: UnitClock, now: datetime
) -> UnitStatus:
    """A unit's status at `now` (not before `clock.valid_from`): the windows of top-up use,
    top-up filtration and hot readings laid over its kept entries."""
    return unit_status_from(unit, filters, clock.inputs(), now)


def unit_status_from(
    unit: Unit, filters: Sequence[FilterPosition], inputs: UnitInputs, now: datetime
) -> UnitStatus:
    """`unit_at` over a clock's inputs (as a kept row reads back: `UnitInputs.from_row`)."""
    flags: list[str] = []
    notes: list[str] = []
    consumption = topup_consumption(
        unit, inputs.fills, now, inputs.first_at, inputs.early_l, inputs.early_n
    )
    if consumption and consumption.rising:
        flags.append("leak-suspect")
        notes.append(f"fluid use is rising: {consumption.note}; look for a leak (never by hand)")
    window_start = now - TOPUP_WINDOW  # a top-up at or after it: now - at <= TOPUP_WINDOW
    finest_um = finest_rating_um(filters)
    for t in inputs.fills:
        if t.at >= window_start:
            problem = filtration_problem(t, finest_um)
            if problem:
                flags.append("unfiltered-topup" if t.filtered_um is None else "coarse-topup")
                notes.append(problem)
    code = sample_text = None
    if inputs.sample:
        code, sample_text, meets = inputs.sample
        if meets is False:
            flags.append("over-target")
            notes.append(f"latest sample {sample_text}")
    if (water := water_flag(inputs.water_ppm)) is not None:
        flags.append("water-high")
        notes.append(water)
    if any(now - at <= HOT_LOOKBACK for at in inputs.hot):
        flags.append("hot")
    return UnitStatus(
        unit.tag,
        unit.name,
        unit.area,
        consumption,
        code,
        unit.target_code,
        sample_text or "",
        tuple(dict.fromkeys(flags)),
        tuple(notes),
    )


def unit_status(
    book: Book, unit: Unit, filters: Sequence[FilterPosition], now: datetime
) -> UnitStatus:
    """A unit's fluid care: top-up use, top-up filtration, latest sample, hot readings."""
    return unit_at(unit, filters, unit_clock(book, unit, now), now)
