"""The one "most urgent first" order: the app's watch list and `sumpbook status` (its table
and the JSON's lists) sort by `order_key`, defined here and nowhere else.

1. Dirty oil is reaching the system now, or the element is gone: ΔP DROP, AT BYPASS,
   IND BYPASS (`URGENT_FLAGS`). Inspect now.
2. Overdue or over the limit: a change or swap whose likely date has passed, a forecast that
   says check now or past the limit, OVER LIMIT.
3. Anything else flagged that asks for a look (STEP UP, FAST LOAD, IND DIRTY, HOT, READ DUE,
   DIRTY OIL, LEAK?, SPENT, UNFILTERED, ...).
4. Everything else, notices included (`NOTICE_FLAGS`, shown in lower case): "cold start" says a start colder than the
   unit's coldest expected start would open the bypass, a caution for cold mornings and no
   task before the element's own date; NO LIMITS asks for settings, not for a visit.

Within a group: the nearest likely due date first (none last), then the fuller element (% of
its change limit), then the tag. No imports of ours: the status model and the sheets both
take their order from here.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from datetime import datetime

URGENT_FLAGS = ("dp-drop", "at-bypass", "indicator-bypass")
NOTICE_FLAGS = ("cold-start-bypass", "no-limits")
OVERDUE_STATES = ("check-now", "past-limit", "past-bypass")
_URGENT, _NOTICE = frozenset(URGENT_FLAGS), frozenset(NOTICE_FLAGS)  # asked of every line


# What a line in group 1 asks for, in place of its due date (the first urgent flag decides);
# the notes say what to check.
ACT_NOW = {
    "dp-drop": "INSPECT NOW",  # torn, collapsed or missing element, or bypass stuck open
    "at-bypass": "CHANGE NOW",  # unfiltered oil is passing
    "indicator-bypass": "CHANGE NOW",
}


def act_now(flags: Iterable[str]) -> str:
    """What an urgent line asks for now ("" when nothing is urgent): its headline says this,
    not "change due 11–17 Dec"."""
    return next((ACT_NOW[f] for f in flags if f in ACT_NOW), "")


def filter_overdue(state: str, due_likely: datetime | None, now: datetime) -> bool:
    """A filter is overdue in an overdue state, or once its likely change date has passed."""
    return state in OVERDUE_STATES or (due_likely is not None and due_likely <= now)


def tier(flags: Iterable[str], overdue: bool) -> int:
    """0 inspect now, 1 overdue or over the limit, 2 another flag, 3 nothing pressing."""
    flags = tuple(flags)
    if not _URGENT.isdisjoint(flags):
        return 0
    if overdue or "over-limit" in flags:
        return 1
    if not _NOTICE.issuperset(flags):
        return 2
    return 3


def order_key(
    flags: Iterable[str],
    overdue: bool,
    due_likely: datetime | None,
    percent_of_limit: float | None,
    tag: str,
) -> tuple:
    """The sort key of one line (filter, breather or unit): most urgent first."""
    due = due_likely.timestamp() if due_likely is not None else math.inf
    return (tier(flags, overdue), due, -(percent_of_limit or 0.0), tag.upper(), tag)
