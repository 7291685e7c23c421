"""Text for the app's cells and lines: quantities in the user's units, dates, bars, trends.

Meaning is always in the words and numbers; styles only add emphasis.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from datetime import datetime, tzinfo

from rich.text import Text

from store.prefs import Prefs
from store.status import FLAG_WORDS, URGENT_FLAGS, Due
from store.text import inert
from store.units import from_bar, from_c, from_l
from tui.quantities import (  # noqa: F401 - the app's widgets take them from here
    p_digits,
    p_unit,
    pressure,
    t_unit,
    temperature,
    v_unit,
    volume,
)

BLOCKS = "▁▂▃▄▅▆▇█"
KIND_SHORT = {
    "suction-strainer": "strainer",
    "suction": "suction",
    "pressure": "pressure",
    "return": "return",
    "offline": "off-line",
    "desiccant": "breather",
    "plain": "breather",
    "unit": "unit",
}
STATE_WORDS = {
    "ok": "on trend",
    "check-now": "CHECK NOW",
    "past-limit": "AT LIMIT",
    "past-bypass": "AT BYPASS",
    "too-few-readings": "few readings",
    "no-readings": "no readings",
    "flat": "no rise yet",
    "no-limits": "no limits set",
    "indicator-only": "by indicator",
    "overdue": "OVERDUE",
    "no-swaps": "no swap yet",
    "flagged": "",
}


def shown(value: str | Text) -> Text:
    """Stored text as a cell or line of the app: never read as markup (a `Text`), control and
    escape characters made visible (`store.text.inert`, one character for one, so a styled
    `Text` keeps its styles in place)."""
    if isinstance(value, Text):
        if not value.plain.isprintable():
            value = value.copy()
            value.plain = inert(value.plain)
        return value
    return Text(inert(value))


def input_pressure(value_bar: float | None, prefs: Prefs) -> str:
    """A stored pressure as the user would type it (no unit: the field's label has it)."""
    if value_bar is None:
        return ""
    return f"{from_bar(value_bar, prefs.pressure):.4g}"


def input_temperature(value_c: float | None, prefs: Prefs) -> str:
    if value_c is None:
        return ""
    return f"{from_c(value_c, prefs.temperature):.4g}"


def input_volume(value_l: float | None, prefs: Prefs) -> str:
    if value_l is None:
        return ""
    return f"{from_l(value_l, prefs.volume):.4g}"


def day(moment: datetime | None, local: tzinfo) -> str:
    return moment.astimezone(local).strftime("%d %b") if moment else "–"


def stamp(moment: datetime | None, local: tzinfo) -> str:
    return moment.astimezone(local).strftime("%Y-%m-%d %H:%M") if moment else "–"


def short_stamp(moment: datetime | None, local: tzinfo) -> str:
    return moment.astimezone(local).strftime("%d %b %H:%M") if moment else "–"


def due_cell(due: Due | None, state: str, overdue: bool, local: tzinfo) -> str:
    """'13 May −1/+2d': the likely day, then how many days earlier or later it may come
    (or the state in words when there is no date)."""
    if due is None:
        return "OVERDUE" if overdue else STATE_WORDS.get(state, state)
    likely = due.likely.astimezone(local)
    head = f"{likely:%d %b}"
    if overdue:
        return f"OVERDUE {head}"
    before = math.ceil((due.likely - due.earliest).total_seconds() / 86400 - 0.01)
    if due.latest is None:
        return f"{head} −{before}/+?d"
    after = math.ceil((due.latest - due.likely).total_seconds() / 86400 - 0.01)
    if before <= 0 and after <= 0:
        return head
    if before == after:
        return f"{head} ±{before}d"
    return f"{head} −{max(before, 0)}/+{max(after, 0)}d"


def due_text(due: Due | None, local: tzinfo) -> str:
    """'12–15 May (likely 13 May)' for lines with room; an open end says so."""
    if due is None:
        return "–"
    first, likely = due.earliest.astimezone(local), due.likely.astimezone(local)
    if due.latest is None:
        return f"from {first:%d %b} (likely {likely:%d %b}, no upper bound yet)"
    last = due.latest.astimezone(local)
    if first.date() == last.date():
        return f"{likely:%d %b}"
    left = f"{first:%d %b}" if first.month != last.month else f"{first:%d}"
    return f"{left}–{last:%d %b} (likely {likely:%d %b})"


def flag_text(flags: Sequence[str]) -> Text:
    """Flags as words; the urgent ones also bold and reversed."""
    text = Text()
    for i, flag in enumerate(flags):
        if i:
            text.append(", ")
        word = FLAG_WORDS.get(flag, flag)
        text.append(word, style="bold reverse" if flag in URGENT_FLAGS else "bold")
    return text


def limit_bar(percent: float | None, cells: int = 5) -> Text:
    """'███░░  62%': a small bar of the change limit, with the number beside it."""
    if percent is None:
        return Text("–")
    filled = max(0, min(cells, round(percent / 100 * cells)))
    bar = "█" * filled + "░" * (cells - filled)
    return Text(f"{bar} {percent:3.0f}%", style="bold" if percent >= 100 else "")


def sparkline(values: Sequence[float], top: float | None, width: int = 8) -> str:
    """One-line trend, scaled from zero to `top` (the change limit) so height means something."""
    vals = [v for v in values if v is not None and math.isfinite(v)][-width:]
    if not vals:
        return ""
    ceiling = top if top and top > 0 else max(vals) or 1.0
    out = []
    for v in vals:
        share = max(0.0, min(v / ceiling, 1.0))
        out.append(BLOCKS[min(int(share * (len(BLOCKS) - 1) + 0.5), len(BLOCKS) - 1)])
    return "".join(out)


def age_text(hours: float | None) -> str:
    if hours is None or not math.isfinite(hours):
        return "–"
    if hours < 72:
        return f"{hours:.0f} h"
    return f"{hours / 24:.0f} d ({hours:.0f} h)"


def plain(value: object) -> Text:
    """A table cell that is never read as markup."""
    return Text("" if value is None else str(value))
