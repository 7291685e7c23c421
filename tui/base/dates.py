"""Days as the app and the command line both write them: a day of this year without its year,
any other day with it, and a due window in one form everywhere."""

from __future__ import annotations

from datetime import datetime, tzinfo
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from store.health.status_model import Due


def day_text(moment: datetime, local: tzinfo, this_year: int) -> str:
    """'13 May', or '16 May 2028' when the day is in another year than `this_year`."""
    here = moment.astimezone(local)
    return f"{here:%d %b}" if here.year == this_year else f"{here:%d %b %Y}"


def due_text(due: Due | None, local: tzinfo, this_year: int) -> str:
    """'12–15 May (likely 13 May)'; an open end says so; days in another year show their
    year."""
    if due is None:
        return "–"
    first, likely = due.earliest.astimezone(local), due.likely.astimezone(local)
    sure = day_text(likely, local, this_year)
    if due.latest is None:
        return f"from {day_text(first, local, this_year)} (likely {sure}, no upper bound yet)"
    last = due.latest.astimezone(local)
    if first.date() == last.date():
        return sure
    end = day_text(last, local, this_year)
    if first.year != last.year:
        left = day_text(first, local, this_year)
    elif first.month != last.month:
        left = f"{first:%d %b}"
    else:
        left = f"{first:%d}"
    return f"{left}–{end} (likely {sure})"
