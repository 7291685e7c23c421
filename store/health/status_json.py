"""The watch list as JSON (`sumpbook status --json`): every filter, breather and unit of a
`status_model.Watch`, times in the plant's zone, numbers rounded as the answer shows them."""

from __future__ import annotations

from typing import Any

from store.base.timeutil import iso_local
from store.health.status_model import Due, FilterStatus, Watch


def _due_json(due: Due | None, local: Any) -> dict[str, str] | None:
    if due is None:
        return None
    earliest, likely, latest = due.earliest, due.likely, due.latest
    return {
        "earliest": earliest.astimezone(local).isoformat(timespec="seconds") if earliest else None,
        "likely": likely.astimezone(local).isoformat(timespec="seconds") if likely else None,
        "latest": latest.astimezone(local).isoformat(timespec="seconds") if latest else None,
    }


def _r(value: float | None, digits: int = 3) -> float | None:
    return None if value is None else round(value, digits)


def _filter_json(f: FilterStatus, local: Any) -> dict[str, Any]:
    """One filter's object. Written out (no helper per field): on a big plant this runs a
    thousand times per answer; iso_local's and _r's work inline, the same values."""
    reading_at, nxt, cold, life = f.reading_at, f.next_reading, f.cold, f.life
    dp, dp_ref, temp, pct, age, pace = (
        f.dp_bar, f.dp_ref_bar, f.temp_c, f.percent_of_limit, f.element_age_h, f.pace,
    )  # fmt: skip
    return {
        "filter": f.filter,
        "unit": f.unit,
        "kind": f.kind,
        "dp_bar": None if dp is None else round(dp, 3),
        "dp_ref_bar": None if dp_ref is None else round(dp_ref, 3),
        "temp_c": None if temp is None else round(temp, 1),
        "indicator": f.indicator,
        "reading_at": reading_at.astimezone(local).isoformat(timespec="seconds")
        if reading_at
        else None,
        "reference": f.reference,
        "limit_bar": f.limit_bar,
        "bypass_bar": f.bypass_bar,
        "percent_of_limit": None if pct is None else round(pct, 1),
        "due": _due_json(f.due, local),
        "bypass_due": _due_json(f.bypass_due, local),
        "basis": f.basis,
        "state": f.state,
        "flags": list(f.flags),
        "notes": list(f.notes),
        "readings_since_change": f.readings_since_change,
        "element_age_h": None if age is None else round(age, 1),
        "pace_vs_earlier": None if pace is None else round(pace, 2),
        "next_reading": None
        if nxt is None
        else {"at": nxt.astimezone(local).isoformat(timespec="seconds"), "rule": f.next_rule},
        "cold_start": None
        if cold is None
        else {
            "start_temp_c": cold.start_temp_c,
            "dp_at_start_bar": _r(cold.dp_at_start_bar),
            "bypasses": cold.bypasses,
            "bypass_below_c": _r(cold.bypass_below_c, 1),
        },
        "service_life": None
        if life is None
        else {
            "b10_h": _r(life.b10_h, 0),
            "b50_h": _r(life.b50_h, 0),
            "failed": life.n_failed,
            "censored": life.n_censored,
        },
    }


def to_json(w: Watch, local: Any = None) -> dict[str, Any]:
    if not local:
        from dateutil import tz  # deferred: status --json is always given the plant's zone

        local = tz.UTC
    return {
        "as_of": iso_local(w.as_of, local),
        "filters": [_filter_json(f, local) for f in w.filters],
        "breathers": [
            {
                "breather": b.breather,
                "unit": b.unit,
                "kind": b.kind,
                "last_swap": iso_local(b.forecast.last_swap, local)
                if b.forecast.last_swap
                else None,
                "due": iso_local(b.forecast.due, local) if b.forecast.due else None,
                "interval_d": _r(b.forecast.interval_d, 1),
                "basis": b.forecast.basis,
                "flags": list(b.flags),
            }
            for b in w.breathers
        ],
        "units": [
            {
                "unit": u.unit,
                "name": u.name,
                "area": u.area,
                "topup_l_per_week": _r(u.consumption.recent_l_per_week, 2)
                if u.consumption
                else None,
                "topup_history_l_per_week": _r(u.consumption.history_l_per_week, 2)
                if u.consumption
                else None,
                "latest_code": u.latest_code,
                "target_code": u.target_code,
                "flags": list(u.flags),
                "notes": list(u.notes),
            }
            for u in w.units
        ],
    }
