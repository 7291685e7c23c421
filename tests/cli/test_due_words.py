"""A due window reads the same in the app and on the command line: one form (tui/base/dates.py)
for the app's lines and the command line's wide watch list."""

from __future__ import annotations

from datetime import UTC, datetime
from zoneinfo import ZoneInfo

import pytest

from store.health.status_model import Due
from tui.base.render import LocalDays
from tui.widgets import fmt

BERLIN = ZoneInfo("Europe/Berlin")
NOW = datetime(2026, 11, 27, 12, tzinfo=UTC)


def _utc(text: str) -> datetime:
    return datetime.fromisoformat(text).replace(tzinfo=UTC)


@pytest.mark.parametrize(
    ("earliest", "likely", "latest", "words"),
    [
        ("2026-12-12T08:00", "2026-12-13T08:00", "2026-12-15T08:00", "12–15 Dec (likely 13 Dec)"),
        ("2026-12-28T08:00", "2026-12-30T08:00", "2027-01-04T08:00",
         "28 Dec–04 Jan 2027 (likely 30 Dec)"),
        ("2027-01-28T08:00", "2027-02-03T08:00", "2027-02-09T08:00",
         "28 Jan–09 Feb 2027 (likely 03 Feb 2027)"),
        ("2026-12-12T08:00", "2026-12-13T08:00", None,
         "from 12 Dec (likely 13 Dec, no upper bound yet)"),
        ("2026-12-12T08:00", "2026-12-12T10:00", "2026-12-12T12:00", "12 Dec"),
        # 23:30 UTC is the next day in Berlin: the plant's days, not UTC's
        ("2026-12-31T23:30", "2026-12-31T23:40", "2026-12-31T23:50", "01 Jan 2027"),
    ],
)  # fmt: skip
def test_the_app_and_the_command_line_write_a_due_window_alike(earliest, likely, latest, words):
    due = Due(_utc(earliest), _utc(likely), _utc(latest) if latest else None)
    days = LocalDays(BERLIN, NOW.astimezone(BERLIN).year)
    assert fmt.due_text(due, BERLIN, NOW) == words
    assert days.due_text(due) == words


def test_no_due_is_a_dash_in_both():
    assert fmt.due_text(None, BERLIN, NOW) == LocalDays(BERLIN, 2026).due_text(None) == "–"


def test_a_breathers_due_day_shows_its_year_only_when_not_this_one():
    days = LocalDays(BERLIN, 2026)
    assert days.due_day(_utc("2026-11-05T10:00")) == fmt.day(_utc("2026-11-05T10:00"), BERLIN, NOW)
    assert days.due_day(_utc("2026-11-05T10:00")) == "05 Nov"
    assert days.due_day(_utc("2027-01-30T10:00")) == "30 Jan 2027"
    assert days.due_day(None) == "–"
