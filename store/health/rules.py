"""The flag rules of a filter's status: one small function each, giving its flags and notes
as (flag, note) pairs (either may be None). `status.status_from` runs them in the order of
the flags and notes in the status: `no_limits` (the settings), the forecast's own note,
`fast_loading` (the pace against earlier elements), `service_life` (the plan from earlier
lives, where the readings give no date), then READING_RULES in their order, each from what
the element's readings show (`Facts`)."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

from store.base.records import frozen_record
from store.health.elements import Point
from store.health.notes import Note
from store.physics.normalise import ColdStart

if TYPE_CHECKING:
    from store.forecast import trend
    from store.forecast.life import WeibullFit

Found = list[tuple[str | None, Note | None]]


def no_limits(limit_bar: float | None, bypass_bar: float | None) -> Found:
    """No change limit or no bypass setting: no due date can be given."""
    if not limit_bar or not bypass_bar:
        return [("no-limits", Note("no-limits"))]
    return []


def fast_loading(pace: trend.Pace | None) -> Found:
    """The element loads faster than the earlier ones on the position that ran to the limit."""
    if pace is not None and pace.fast:
        return [("fast-loading", Note("fast-loading", {"ratio": pace.ratio, "n": pace.n}))]
    return []


def service_life(
    due_found: bool, state: str, fit: WeibullFit | None, limit_bar: float | None
) -> Found:
    """No date from the readings (too few, none, flat) but earlier lives to plan from: the
    note of the service-life plan (its dates are worked out for the age at read time)."""
    if due_found or state not in ("too-few-readings", "no-readings", "flat"):
        return []
    if not fit or not limit_bar:
        return []
    return [(None, Note("service-life", {"b10_h": fit.age_at_fraction_h(0.10)}))]


@frozen_record
class Facts:
    limit_bar: float | None
    bypass_bar: float | None
    coldest_start_c: float
    dp_ref_bar: float | None  # the newest gauge reading's, at the reference condition
    last: Point | None  # the newest reading (gauge or indicator)
    series: Sequence[tuple[float, float]]  # (age h, reference ΔP) in age order
    percent_of_limit: float | None
    newest_age_h: float | None  # the newest gauge reading's element age
    cold: ColdStart | None  # ΔP at the coldest start, where it could be worked out ...
    cold_error: str | None  # ... or why not


def over_limit(f: Facts) -> Found:
    """The reference ΔP at the bypass setting, or else at the change limit."""
    ref = f.dp_ref_bar
    if ref is not None and f.bypass_bar and ref >= f.bypass_bar:
        return [("at-bypass", None)]
    if ref is not None and f.limit_bar and ref >= f.limit_bar:
        return [("over-limit", None)]
    return []


def gauge_at_bypass(f: Facts) -> Found:
    """The gauge itself read at or over the bypass setting (where the reference ΔP is not)."""
    last, ref = f.last, f.dp_ref_bar
    if last is None or last.dp_bar is None or not f.bypass_bar or last.dp_bar < f.bypass_bar:
        return []
    if ref is not None and ref >= f.bypass_bar:
        return []  # over_limit said it
    return [("at-bypass", Note("gauge-at-bypass"))]


def indicator(f: Facts) -> Found:
    if f.last and f.last.indicator == "bypass":
        return [("indicator-bypass", None)]
    if f.last and f.last.indicator == "dirty":
        return [("indicator-dirty", None)]
    return []


def dp_drop(f: Facts) -> Found:
    from store.forecast import anomaly  # deferred: numpy loads on first fit

    drop = anomaly.drop_without_change(f.series)
    if drop is None:
        return []
    return [("dp-drop", Note("dp-drop", {"reason": drop.reason, "advice": drop.advice}))]


def step_up(f: Facts) -> Found:
    from store.forecast import anomaly  # deferred: numpy loads on first fit

    step = anomaly.step_up(f.series)
    if step is None:
        return []
    return [("step-up", Note("step-up", {"reason": step.reason, "advice": step.advice}))]


def cold_start_bypass(f: Facts) -> Found:
    """A start at the unit's coldest would open the bypass (or why that was not worked out)."""
    if f.cold_error is not None:
        return [(None, Note("no-cold-start", {"error": f.cold_error}))]
    if f.cold is None or not f.cold.bypasses:
        return []
    params = {
        "start_c": f.coldest_start_c,
        "dp_bar": f.cold.dp_at_start_bar,
        "below_c": f.cold.bypass_below_c,
    }
    return [("cold-start-bypass", Note("cold-start-bypass", params))]


# A new element is clean: half its change limit within its first three days (of service
# hours on an hour meter) says something is wrong with it or with the system, long before a
# due date would. # common practice, no source
YOUNG_ELEMENT_H = 72.0
YOUNG_ELEMENT_SHARE = 0.5


def young_high(percent_of_limit: float | None, age_h: float) -> Note | None:
    """The new-element note for the newest reading's share of the limit at element age age_h."""
    if percent_of_limit is None or age_h > YOUNG_ELEMENT_H:
        return None
    if percent_of_limit < 100 * YOUNG_ELEMENT_SHARE:
        return None
    return Note("new-element-high", {"percent": percent_of_limit, "age_h": age_h})


def new_element_high(f: Facts) -> Found:
    if f.newest_age_h is None:
        return []
    note = young_high(f.percent_of_limit, f.newest_age_h)
    return [] if note is None else [("new-element-high", note)]


READING_RULES: tuple[Callable[[Facts], Found], ...] = (
    over_limit,
    gauge_at_bypass,
    indicator,
    dp_drop,
    step_up,
    cold_start_bypass,
    new_element_high,
)
