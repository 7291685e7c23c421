"""The app's start loads what the watch list needs and no more (issue 21, item 3).

The app is started in a fresh interpreter on a copy of the demo plant whose kept rows are
fresh, and the modules loaded by the moment its list is painted (`first_paint_done`, which
then starts the work behind the list) are listed: no other screen, no form, no chart library,
no fitting maths. Then a filter sheet is opened in the same run, and its screen, the chart
library and the forecast show up (so the check is not blind). How long a start takes is
measured by tests/benchmarks/speed.py, not here.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from store import record
from store.base.session import fixed_clock
from store.db.book import open_book
from tests.kit.plant import write_prefs

ROOT = Path(__file__).resolve().parents[2]

# Run in the child: start the app, note sys.modules at the first paint (the work behind the
# list is not started: it loads the fitting maths on purpose), then open a filter sheet.
CHILD = """
import asyncio, json, sys
from store.db.book import open_book
from tui.app import SumpbookApp

at_paint = []
SumpbookApp.first_paint_done = lambda self: at_paint.append(sorted(sys.modules))

async def quiet(pilot):  # every worker ended, and what it handed to the UI loop handled
    await pilot.pause()
    while pilot.app.workers:
        await pilot.app.workers.wait_for_complete()
        await pilot.pause()

async def main():
    app = SumpbookApp(open_book(sys.argv[1], create=False), cursor_blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        while not at_paint:  # the list's read, then the paint that calls the hook
            await quiet(pilot)
        app.screen.query_one("#watch-table").move_cursor(row=0)
        await pilot.press("enter")
        await quiet(pilot)  # the opening's read (and the sheet's own, had it been slow)
        assert type(app.screen).__name__ == "FilterSheetScreen" and app.screen.loaded
        print(json.dumps({"paint": at_paint[0], "sheet": sorted(sys.modules)}))

asyncio.run(main())
"""

NOT_AT_START = ("numpy", "scipy", "plotext", "textual_plotext", "sqlite_utils", "store.forecast",
                "tui.forms", "tui.widgets.plot", "tui.screens.filter_sheet",
                "tui.screens.unit_sheet", "tui.screens.shift_log", "tui.screens.register",
                "tui.screens.round_sheet", "tui.screens.help", "tui.screens.first_run",
                "tui.screens.sign_in", "tui.screens.tag_prompt",
                # the backups and the throw-away books: after the paint, on close, on demand
                "store.db.backup", "store.db.proof", "store.exchange.demo")  # fmt: skip


def loaded_of(names: list[str], packages: tuple[str, ...]) -> list[str]:
    return sorted(n for n in names if any(n == p or n.startswith(p + ".") for p in packages))


def test_the_painted_list_loads_no_other_screen_form_chart_or_fitting_maths(demo_file, tmp_path):
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    with open_book(path, create=False) as book:
        now = book.now()
    with open_book(path, create=False, clock=fixed_clock(now)) as book:
        record.rebuild(book)  # fresh kept rows: the list is read, not computed
    env = {**os.environ, "SUMPBOOK_CONFIG": str(write_prefs(tmp_path, tech="AK")),
           "SUMPBOOK_NOW": now.isoformat(), "PYTHONPATH": str(ROOT)}  # fmt: skip
    done = subprocess.run([sys.executable, "-c", CHILD, str(path)], capture_output=True,
                          text=True, env=env, cwd=ROOT, timeout=240, check=False)  # fmt: skip
    assert done.returncode == 0, done.stderr[-3000:]
    seen = json.loads(done.stdout.strip().splitlines()[-1])
    assert "tui.screens.watch" in seen["paint"]
    assert loaded_of(seen["paint"], NOT_AT_START) == []
    # Not blind: the filter sheet brings its screen, the chart and the forecast.
    sheet = loaded_of(seen["sheet"], NOT_AT_START)
    for name in ("tui.screens.filter_sheet", "textual_plotext", "store.forecast.trend", "numpy"):
        assert name in sheet


BEHIND_THE_LIST = """
import asyncio, gc, json, sys
from store.db.book import open_book
from tui.app import SumpbookApp

async def main():
    app = SumpbookApp(open_book(sys.argv[1], create=False), cursor_blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        while not app.book_checked:  # the check behind the painted list, and what follows it
            await pilot.pause(0.05)
        await pilot.pause()
        loaded_behind = [sys.modules[name].__dict__ for name in
                         ("tui.screens.filter_sheet", "store.forecast.trend", "numpy")]
        passed_over = {id(o) for o in gc.get_objects()}  # frozen objects are left out
        print(json.dumps({"screen": type(app.screen).__name__, "loaded": sorted(sys.modules),
                          "walked": sum(id(d) in passed_over for d in loaded_behind)}))

asyncio.run(main())
"""


def test_behind_the_list_the_first_sheet_s_imports_are_made(demo_file, tmp_path):
    """Once the check behind the list has run, the fitting maths and the filter sheet's screen
    with its chart library are loaded, before any sheet is opened: the first Enter on a
    filter waits for no import."""
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    env = {**os.environ, "SUMPBOOK_CONFIG": str(write_prefs(tmp_path, tech="AK")),
           "PYTHONPATH": str(ROOT)}  # fmt: skip
    done = subprocess.run([sys.executable, "-c", BEHIND_THE_LIST, str(path)],
                          capture_output=True, text=True, env=env, cwd=ROOT, timeout=240,
                          check=False)  # fmt: skip
    assert done.returncode == 0, done.stderr[-3000:]
    seen = json.loads(done.stdout.strip().splitlines()[-1])
    assert seen["screen"] != "FilterSheetScreen"
    for name in ("tui.screens.filter_sheet", "textual_plotext", "store.forecast.trend"):
        assert name in seen["loaded"], name
    # What was loaded behind the list lives as long as the app: frozen out of the
    # collector's full passes, as what was loaded before the paint is (a full pass over it
    # stalled the app for 45–50 ms on the one-year plant, at whatever key it fell on).
    assert seen["walked"] == 0
