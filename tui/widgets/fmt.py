"""Text for the app's cells and lines: quantities in the user's units, dates, bars, trends.

Meaning is always in the words and numbers; styles only add emphasis.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from datetime import UTC, datetime, tzinfo
from functools import partial
from typing import Any

from rich.text import Text

from store.base.prefs import Prefs
from store.base.text import inert
from store.base.units import from_bar, from_c, from_l
from store.health.status_model import FLAG_WORDS, URGENT_FLAGS, Due
from store.health.urgency import NOTICE_FLAGS
from tui.base import dates
from tui.base.quantities import (  # noqa: F401 - the app's widgets take them from here
    p_digits,
    p_unit,
    pressure,
    t_unit,
    temperature,
    v_unit,
    volume,
)

BLOCKS = "▁▂▃▄▅▆▇█"
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
    escape characters made visible (`store.base.text.inert`, one character for one, so a styled
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


# The plant's "now" for deciding whether a date needs its year; the app sets it to its
# book's clock (a demo or a test book may be frozen in time).
clock: Callable[[], datetime] = partial(datetime.now, UTC)


def _year(local: tzinfo, now: datetime | None) -> int:
    return (now or clock()).astimezone(local).year


def _date(moment: datetime, local: tzinfo, now: datetime | None) -> str:
    """'13 May', or '16 May 2028' when the day is in another year than today."""
    return dates.day_text(moment, local, _year(local, now))


def day(moment: datetime | None, local: tzinfo, now: datetime | None = None) -> str:
    return _date(moment, local, now) if moment else "–"


def stamp(moment: datetime | None, local: tzinfo) -> str:
    return moment.astimezone(local).strftime("%Y-%m-%d %H:%M") if moment else "–"


def short_stamp(moment: datetime | None, local: tzinfo, now: datetime | None = None) -> str:
    if not moment:
        return "–"
    return f"{_date(moment, local, now)} {moment.astimezone(local):%H:%M}"


def due_cell(
    due: Due | None, state: str, overdue: bool, local: tzinfo, now: datetime | None = None
) -> str:
    """'13 May −1/+2d': the likely day, then how many days earlier or later it may come
    (or the state in words when there is no date); a day in another year shows its year."""
    if due is None:
        return "OVERDUE" if overdue else STATE_WORDS.get(state, state)
    head = _date(due.likely, local, now)
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


# Why the next reading falls where it does (store/forecast/readplan.py RULES).
READ_RULE_WORDS = {
    "forecast": "half the time to the earliest change date",
    "service-life": "from earlier element lives",
    "interval": "the filter's reading interval",
    "shift": "each shift: near its limit or flagged",
    "change": "change by the earliest date, or read then",
}


def read_again_text(moment: datetime | None, rule: str, local: tzinfo) -> str:
    """'read again by Fri 27 Nov 15:24 (the filter's reading interval)', or '' without one."""
    if moment is None:
        return ""
    why = READ_RULE_WORDS.get(rule, rule)
    return f"read again by {moment.astimezone(local):%a %d %b %H:%M}" + (f" ({why})" if why else "")


def due_text(due: Due | None, local: tzinfo, now: datetime | None = None) -> str:
    """'12–15 May (likely 13 May)' for lines with room (`tui.base.dates.due_text`)."""
    return dates.due_text(due, local, _year(local, now))


def flag_text(flags: Sequence[str]) -> Text:
    """Flags as words; the urgent ones bold and reversed, notices (cold start, no limits)
    plain, the others bold."""
    text = Text()
    for i, flag in enumerate(flags):
        if i:
            text.append(", ")
        word = FLAG_WORDS.get(flag, flag)
        style = "bold reverse" if flag in URGENT_FLAGS else "" if flag in NOTICE_FLAGS else "bold"
        text.append(word, style=style)
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


def age_text(hours: float | None, operating: bool = False) -> str:
    """An element age or life: calendar hours as days (and hours), or, where the ages are
    operating hours off the hour meter, as hours run: 747 operating hours are not 31 days."""
    if hours is None or not math.isfinite(hours):
        return "–"
    if operating:
        return f"{hours:.0f} h run"
    if hours < 72:
        return f"{hours:.0f} h"
    return f"{hours / 24:.0f} d ({hours:.0f} h)"


def plain(value: object) -> Text:
    """A table cell that is never read as markup."""
    return Text("" if value is None else str(value))


def phrase_lines(
    console: Any, width: int, phrases: Sequence[str | Text], indent: int = 2
) -> list[Text]:
    """Phrases joined by ' · ', wrapped between phrases, not inside one (a phrase longer
    than the line wraps at its spaces); the lines after the first are indented."""
    width = max(width, 10)
    out: list[Text] = []
    line = Text()
    for phrase in (p if isinstance(p, Text) else Text(p) for p in phrases if p):
        if line.plain and len(line.plain) + 3 + len(phrase.plain) <= width:
            line.append(" · ")
            line.append_text(phrase)
            continue
        if line.plain:
            out.append(line)
            line = Text(" " * indent)
        line.append_text(phrase)
        if len(line.plain) > width:
            lead = len(line.plain) - len(line.plain.lstrip())
            parts = line[lead:].wrap(console, width - indent)
            for i, part in enumerate(parts[:-1]):
                out.append(Text(" " * (lead if i == 0 else indent)) + part)
            line = Text(" " * indent) + parts[-1]
    if line.plain.strip():
        out.append(line)
    return out


def hanging_lines(console: Any, width: int, text: str) -> list[Text]:
    """Lines laid out by hand ('  d   Open the demo…') that wrap under their own text when
    the width is short, never back to the left edge."""
    width = max(width, 20)
    out: list[Text] = []
    for line in text.splitlines():
        if len(line) <= width:
            out.append(Text(line))
            continue
        hang = _HANG.match(line).group(1)  # type: ignore[union-attr]
        if len(hang) > width // 2:
            hang = hang[: len(hang) - len(hang.lstrip())]
        for i, part in enumerate(Text(line[len(hang) :]).wrap(console, width - len(hang))):
            out.append(Text(hang if i == 0 else " " * len(hang)) + part)
    return out


_HANG = re.compile(r"^(\s*(?:\S{1,6}\s{2,})?)")


_QUANTITY = re.compile(r"(?<![\w.])(-?\d+(?:\.\d+)?) ?(bar|°C)(?![\w/²])")


def in_units(text: str, prefs: Prefs) -> str:
    """A line the book wrote in bar and °C (notes, reasons, the reference label), with each
    pressure and temperature in the user's units."""

    def convert(match: re.Match[str]) -> str:
        value = float(match.group(1))
        if match.group(2) == "bar":
            return pressure(value, prefs)
        return temperature(value, prefs)

    return _QUANTITY.sub(convert, text)
