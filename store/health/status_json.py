"""The watch list as JSON (`sumpbook status --json`): every filter, breather and unit of a
`status_model.Watch`, times in the plant's zone, numbers rounded as the answer shows them."""

from __future__ import annotations

from typing import Any

from dateutil import tz

from store.base.timeutil import iso_local
from store.health.status_model import Due, Watch


def _due_json(due: Due | None, local: Any) -> dict[str, str] | None:
    if due is None:
        return None
    return {
        k: iso_local(getattr(due, k), local) if getattr(due, k) else None
        for k in ("earliest", "likely", "latest")
    }


def _r(value: float | None, digits: int = 3) -> float | None:
    return None if value is None else round(value, digits)


def to_json(w: Watch, local: Any = None) -> dict[str, Any]:
    local = local or tz.UTC
    return {
        "as_of": iso_local(w.as_of, local),
        "filters": [
            {
                "filter": f.filter,
                "unit": f.unit,
                "kind": f.kind,
                "dp_bar": _r(f.dp_bar),
                "dp_ref_bar": _r(f.dp_ref_bar),
                "temp_c": _r(f.temp_c, 1),
                "indicator": f.indicator,
                "reading_at": iso_local(f.reading_at, local) if f.reading_at else None,
                "reference": f.reference,
                "limit_bar": f.limit_bar,
                "bypass_bar": f.bypass_bar,
                "percent_of_limit": _r(f.percent_of_limit, 1),
                "due": _due_json(f.due, local),
                "bypass_due": _due_json(f.bypass_due, local),
                "basis": f.basis,
                "state": f.state,
                "flags": list(f.flags),
                "notes": list(f.notes),
                "readings_since_change": f.readings_since_change,
                "element_age_h": _r(f.element_age_h, 1),
                "pace_vs_earlier": _r(f.pace, 2),
                "next_reading": None
                if f.next_reading is None
                else {"at": iso_local(f.next_reading, local), "rule": f.next_rule},
                "cold_start": None
                if f.cold is None
                else {
                    "start_temp_c": f.cold.start_temp_c,
                    "dp_at_start_bar": _r(f.cold.dp_at_start_bar),
                    "bypasses": f.cold.bypasses,
                    "bypass_below_c": _r(f.cold.bypass_below_c, 1),
                },
                "service_life": None
                if f.life is None
                else {
                    "b10_h": _r(f.life.b10_h, 0),
                    "b50_h": _r(f.life.b50_h, 0),
                    "failed": f.life.n_failed,
                    "censored": f.life.n_censored,
                },
            }
            for f in w.filters
        ],
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
