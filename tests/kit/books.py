"""Small books with a known history, built through the store: an element loading faster
than the earlier ones (pace), and an hour-meter unit (meter)."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

from store import record
from store.db.book import open_book
from store.ledger import register
from store.ledger.entries import ElementChange, Reading
from store.ledger.register import FilterPosition, Fluid, Technician, Unit

T0 = datetime(2026, 3, 2, 6, 0, tzinfo=UTC)
PACE_LIMIT, PACE_CLEAN = 2.0, 0.3  # bar; a return filter (REFERENCES.md §7a, from memory)


def exp_dp(age_h: float, life_h: float) -> float:
    """Clean ΔP plus an exponential rise that reaches the limit at life_h (our own model)."""
    a = 0.05
    k = math.log1p((PACE_LIMIT - PACE_CLEAN) / a) / life_h
    return PACE_CLEAN + a * math.expm1(k * age_h)


def pace_book(tmp_path, current_life_h: float):
    """Six earlier elements of 950-1050 h and a current one of `current_life_h`, read daily to
    60 % of its life (readings at the unit's normal temperature: reference ΔP = gauge ΔP)."""
    book = open_book(tmp_path / "pace.db")
    register.add(book, Technician(tag="AB"))
    register.add(book, Fluid(tag="HV46", iso_vg=46))
    register.add(book, Unit(tag="M2", fluid="HV46", normal_temp_c=50))
    register.add(
        book,
        FilterPosition(
            tag="M2-RF",
            unit="M2",
            kind="return",
            limit_bar=PACE_LIMIT,
            bypass_bar=3.0,
            clean_bar=PACE_CLEAN,
            reading_interval_h=17_520,
        ),
    )
    t = T0
    entries = []
    lives = (950.0, 1000.0, 1050.0, 980.0, 1020.0, 1000.0, current_life_h)
    for i, life in enumerate(lives):
        entries.append(ElementChange(filter="M2-RF", reason="limit", by="AB", at=t))
        current = i == len(lives) - 1
        last = 0.6 * life if current else life
        entries += [
            Reading(filter="M2-RF", dp_bar=exp_dp(h, life), temp_c=50, by="AB",
                    at=t + timedelta(hours=h))
            for h in range(24, int(last), 24)
        ]  # fmt: skip
        t += timedelta(hours=life)
    record.log_many(book, entries)
    now = entries[-1].at + timedelta(hours=1)
    book.set_setting("clock", now.strftime("%Y-%m-%dT%H:%M:%SZ"))
    return book


def meter_book(tmp_path):
    """An hour-meter unit running 12 h a day (our own history), one element with meter
    readings every second day."""
    book = open_book(tmp_path / "meter.db")
    register.add(book, Technician(tag="AB"))
    register.add(book, Fluid(tag="HV46", iso_vg=46))
    register.add(book, Unit(tag="M1", fluid="HV46", normal_temp_c=50, hour_meter=True))
    register.add(
        book,
        FilterPosition(tag="M1-R", unit="M1", kind="return", bypass_bar=3.5, limit_bar=2.5,
                       clean_bar=0.3, reading_interval_h=17_520),
    )  # fmt: skip
    record.log(book, ElementChange(filter="M1-R", hours=1000, by="AB", at=T0))
    record.log_many(
        book,
        [
            Reading(filter="M1-R", dp_bar=0.3 + 0.002 * 12 * day, temp_c=50,
                    hours=1000 + 12 * day, by="AB", at=T0 + timedelta(days=day))
            for day in range(2, 41, 2)
        ],
    )  # fmt: skip
    book.set_setting("clock", (T0 + timedelta(days=41)).strftime("%Y-%m-%dT%H:%M:%SZ"))
    return book
