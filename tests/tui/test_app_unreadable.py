"""Issue 20, item 3 in the app: entry rows no reader can use (a ΔP that is text, a note that
is a blob, put in past the book's checks) are left out of the watch list, the shift log and
the filter sheet, which open, say which rows were left out, and do not stop."""

from __future__ import annotations

import sqlite3

from textual.widgets import DataTable, Static

from tests.kit.plant import CLOCK, app_for, settle
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.shift_log import ShiftLogScreen
from tui.screens.watch import WatchScreen

BAD_DP = "b1b1b1b1-0000-4000-8000-0000000000b1"
BAD_NOTE = "b2b2b2b2-0000-4000-8000-0000000000b2"


def _bad_rows(path) -> None:
    at = CLOCK.strftime("%Y-%m-%dT%H:%M:%SZ")
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")
    conn.execute(
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, filter, dp_bar) "
        "VALUES (?, ?, ?, 'reading', 'AB', 'P1', 'P1-RF', 'abc')",
        [BAD_DP, at, at],
    )
    conn.execute(
        "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, note) "
        "VALUES (?, ?, ?, 'note', 'AB', 'P1', X'00FF')",
        [BAD_NOTE, at, at],
    )
    conn.close()


def _said(app) -> str:
    return " ".join(str(n.message) for n in app._notifications)


async def test_the_app_leaves_out_and_names_rows_it_cannot_read(plant):
    _bad_rows(plant)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert app.screen.query_one(DataTable).row_count > 0
        said = _said(app)  # the watch list read the reading, left it out and named it
        assert BAD_DP[:8] in said, said
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        log = app.screen
        assert BAD_NOTE[:8] in _said(app)  # the shift log reads every kind: the note too
        assert log.shift is not None and all(
            e.id not in (BAD_DP, BAD_NOTE) for e in log.shift.entries
        )
        await pilot.press("1")
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "P1-RF", "P1")
        await settle(pilot, FilterSheetScreen)
        await pilot.pause()
        said = _said(app)
        assert "could not be read" in said and "void" in said
        lines = [
            str(n.message) for n in app._notifications if "could not be read" in str(n.message)
        ]
        assert len(lines) == len(set(lines))  # the same line is said once, not at every read
        assert "P1-RF" in str(app.screen.query_one("#sheet-title", Static).render())
