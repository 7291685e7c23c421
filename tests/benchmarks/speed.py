"""Speed of sumpbook on a plant-sized logbook, each figure against a baseline run in the same go.

Usage:  python tests/benchmarks/speed.py PATH [--out FILE] [--saves N]
        (PATH: a book from tests/benchmarks/make_big_logbook.py, e.g. 200 units, 5 years)

Figures (median of several runs where it is cheap):
1. App start to a painted watch list, a fresh process each time, ÷ a bare Textual app that
   shows a DataTable of as many rows (target ≤ 1.5). "Painted": the list's data is shown and
   the screen has refreshed once after it; the whole-file check the app runs behind the list
   is timed on its own.
2. `sumpbook status --json` ÷ a `python -c` that opens the file with the sqlite3 module and
   runs one indexed query for the latest reading of every filter (target ≤ 3).
3. Export of the book's last year as CSV (`sumpbook export --from --to -o`) ÷ the sqlite3
   shell's own CSV export of the same rows (target ≤ 2.5). Needs Debian's `sqlite3` package
   (`apt-get install sqlite3`); without the shell this ratio is skipped, and said so.
4. Saving one reading, the prediction update included (journal.log on a copy of the book,
   with its commit): median and 99th percentile in ms. `--only-saves`: this figure alone as
   the CPU of each save (`time.process_time`), in fresh processes, in turns with the code of
   `--compare DIR` on its own book (`--compare-book FILE`, e.g. older code's schema).
5. Peak memory (max RSS) of the app process on the big book (target < 250 MB).
6. Scrolling the watch list and opening a filter sheet, driven with Textual's Pilot: ms per
   action (target < 100 ms).
7. Later on: `status --json` right after the caches were kept, a week and a year after the
   last entry (a copy of the book without its frozen clock, SUMPBOOK_NOW moved on), and
   `status --json --as-of` for the whole plant (computed from the entries). With
   `--compare DIR` (a checkout of older code with its own .venv) the same figures for that
   code, in turns, each code on its own copy with its own `rebuild` (`--only-later`: these
   figures alone).
8. The long reads with the collector held (`journal._no_gc_pauses`, as the code has it) and
   without, each in a fresh process, in turns: every entry (`journal.read`) and the whole
   plant a week before the book's clock (`--gc-runs N`, 0 leaves it out).
9. `--only-cli-saves`: `sumpbook log reading` in fresh processes, in turns, with the check note
   a checked session leaves beside the book and without it (a whole-file check first, as
   every session's first save ran before the note): seconds each, and the ratio.
10. A reading saved through the app's form (t, the tag, Enter, the ΔP, Enter) on a copy of the
   book, to its list painted: wall and CPU, and the UI thread's part (putting the list in
   place, the refresh after), against a bare DataTable that changes one cell and sorts its
   rows again (no target). Run with the app's figures (also with `--only-app`).
Figure 1 is also given as the process's CPU to the painted list (threads included), less
moved than the wall time by other work on a shared machine. `--only-app`: figures 1 and 6
alone, the app and the bare app in turns (a minute or so).

The book file is read once before measuring, so every figure is with the file in the
operating system's cache (a laptop that has the book open all shift).
Everything is written to --out (default /tmp/speed_figures.md) with the machine it ran on.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import platform
import random
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import timedelta
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(ROOT))

SIZE = (160, 45)  # a laptop terminal, columns × lines
COLUMNS = 9  # as many as the watch list shows
SCROLL_KEYS = ["down"] * 12 + ["pagedown"] * 4 + ["end", "home"] + ["pagedown"] * 2
SHEETS = 3  # filter sheets opened in each app run (screens in each bare run)
TARGETS = {"app": 1.5, "status": 3.0, "export": 2.5, "memory_mb": 250.0, "action_ms": 100.0,
           "scroll": 2.0, "sheet": 1.2, "watch_ms": 25.0}  # fmt: skip
# Beside the goal's baseline (which prints a count), one that answers with as much: a bare
# Python program that reads every kept filter and unit row in one query each and writes them
# out as one JSON text (about as many bytes as `status --json`; no zone, no clock, no order).
# Reported for context, no target.
DUMP_CODE = (
    "import json, sqlite3, sys; c = sqlite3.connect({path!r}); "
    "rows = c.execute('SELECT filter, key, computed_utc, data FROM status_cache').fetchall(); "
    "rows += c.execute('SELECT unit, key, computed_utc, data FROM unit_cache').fetchall(); "
    "sys.stdout.write(json.dumps(rows, ensure_ascii=False))"
)
BASELINE_SQL = (
    "SELECT f.tag, (SELECT e.dp_bar FROM entries e WHERE e.filter = f.tag "
    "AND e.kind = 'reading' ORDER BY e.at_utc DESC LIMIT 1) FROM filters f"
)


# ---- run in a child process: the app, or the bare DataTable app ----------------------------------


BEHIND = ("book-check", "watch-catch-up")  # what the app runs behind the painted list


async def _settle(pilot, done, timeout: float = 120.0) -> None:
    """Wait until `done()` holds and no worker is running (but the check behind the painted
    list), then for the screen to refresh."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        await pilot.pause()
        busy = [w for w in pilot.app.workers if w.group not in BEHIND]
        if done() and not busy:
            await pilot.pause()
            return
        await asyncio.sleep(0.005)
    raise RuntimeError(f"the screen did not settle: {type(pilot.app.screen).__name__}")


async def _painted(app, done, timeout: float = 120.0) -> None:
    """Wait until `done()` holds and no worker but the check behind the list is running, then
    for the screen's next refresh. Polled with plain sleeps: Pilot's pause waits until the
    process's CPU time stops advancing, which a background thread (the whole-file check)
    holds off for up to a second at a time."""
    end = time.monotonic() + timeout
    while not (done() and not [w for w in app.workers if w.group not in BEHIND]):
        if time.monotonic() > end:
            raise RuntimeError(f"the screen did not settle: {type(app.screen).__name__}")
        await asyncio.sleep(0.002)
    refreshed = asyncio.Event()
    app.call_after_refresh(refreshed.set)
    await refreshed.wait()


async def _timed(pilot, key: str, done) -> tuple[float, float]:
    """(wall ms through Pilot, CPU ms of the whole process, worker threads included)."""
    wall, cpu = time.perf_counter(), time.process_time()
    await pilot.press(key)
    await _settle(pilot, done)
    return 1000 * (time.perf_counter() - wall), 1000 * (time.process_time() - cpu)


async def _drive_app(path: Path, started: float) -> dict:
    # Only what the app itself imports before its list is painted: the filter sheet's
    # module (and the chart library under it) is imported when a sheet is timed.
    from store.db.book import open_book
    from store.db.places import check_note
    from tui.app import SumpbookApp
    from tui.screens.watch import WatchScreen

    # Every run a session that checks the whole file behind its list (the figures before the
    # check note are so): a run after another would take that one's note and skip it.
    check_note(path).unlink(missing_ok=True)
    out: dict = {"imported_s": time.time() - started}
    app = SumpbookApp(open_book(path, create=False), cursor_blink=False)
    async with app.run_test(size=SIZE) as pilot:

        def watch_ready() -> bool:
            return isinstance(app.screen, WatchScreen) and app.screen.loaded

        await _painted(app, watch_ready)
        out["start_to_paint_s"] = time.time() - started
        out["cpu_to_paint_s"] = time.process_time()  # the process's own CPU, threads included
        # The actions are timed once the check behind the list has finished (it takes a core
        # for a few seconds on a big book); how long it ran is reported on its own.
        await _settle(pilot, lambda: watch_ready() and app.book_checked)
        out["check_s"] = app.check_seconds
        table = app.screen.query_one("#watch-table")
        out["rows"] = table.row_count
        out["scroll"] = [await _timed(pilot, key, watch_ready) for key in SCROLL_KEYS]

        def sheet_ready() -> bool:
            return type(app.screen).__name__ == "FilterSheetScreen" and app.screen.loaded

        sheets, back = [], []
        filter_rows = [i for i, r in enumerate(app.screen.shown) if r.what == "filter"]
        picked = filter_rows[:: max(len(filter_rows) // SHEETS, 1)][:SHEETS]
        for i in picked:
            app.screen.query_one("#watch-table").move_cursor(row=i)
            await _settle(pilot, watch_ready)
            sheets.append(await _timed(pilot, "enter", sheet_ready))
            back.append(await _timed(pilot, "escape", watch_ready))
        out["sheet"], out["back"] = sheets, back
    import resource

    out["max_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    app.book.close()
    return out


SAVES_IN_APP = 8  # readings saved through the app's form in each run of figure 10


async def _drive_saves(path: Path, count: int) -> dict:
    """Figure 10: readings saved through the app as a technician saves them (t, the tag,
    Enter, the ΔP, Enter) on a copy of the book, each timed from the Enter that saves to the
    list showing the new reading, painted: wall and CPU of the whole process; the CPU of
    the worker threads' parts (`record.save`, the save with its forecast update and commit;
    `read_watch`, the list read again) and of the UI thread in the screen's `show_data` and
    in the refresh after it (each by `time.thread_time` in its own thread)."""
    from store import record
    from store.db.book import open_book
    from store.ledger.entries import Reading
    from store.sheets import reading_doubts
    from tui.app import SumpbookApp
    from tui.screens import watch as watch_module
    from tui.screens.watch import WatchScreen

    ui: dict[str, list[float]] = {"show": [], "paint": [], "save": [], "read": []}
    show_data = WatchScreen.show_data

    def thread_cpu(call, part: str):  # noqa: ANN001, ANN202
        def timed(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
            began = time.thread_time()
            try:
                return call(*args, **kwargs)
            finally:
                ui[part].append(1000 * (time.thread_time() - began))

        return timed

    record.save = thread_cpu(record.save, "save")  # type: ignore[method-assign]
    watch_module.read_watch = thread_cpu(watch_module.read_watch, "read")

    def timed_show(screen: WatchScreen, data) -> None:
        began = time.thread_time()
        show_data(screen, data)
        shown = time.thread_time()
        ui["show"].append(1000 * (shown - began))
        screen.call_after_refresh(lambda: ui["paint"].append(1000 * (time.thread_time() - shown)))

    WatchScreen.show_data = timed_show  # type: ignore[method-assign]
    app = SumpbookApp(open_book(path, create=False), cursor_blink=False)
    out: dict = {"saves": []}
    async with app.run_test(size=SIZE) as pilot:
        watch = app.screen

        def watch_ready() -> bool:
            return app.screen is watch and watch.loaded

        await _painted(app, watch_ready)
        await _settle(pilot, lambda: watch_ready() and app.book_checked)

        def typed(row) -> float:  # what is typed: a little over its last, below the limit
            return round(min(row.dp_ref_bar * 1.02, 0.9 * row.limit_bar), 2)

        # Readings the form saves without a question (one asked would be timed with it):
        # runs on the same copy, at the book's frozen clock, leave those filters a reading
        # of this very minute (a doubt), so each run takes others.
        rows = [r for r in watch.data.rows if r.what == "filter" and r.gauge and r.limit_bar
                and r.dp_ref_bar and not r.flags]  # fmt: skip
        step = max(len(rows) // count, 1)
        spread = [r for start in range(step) for r in rows[start::step]]
        picked = []
        for r in spread:
            if len(picked) < count and not reading_doubts(
                app.book, Reading(filter=r.tag, dp_bar=typed(r))
            ):
                picked.append(r)
        for row in picked:
            dp_bar = typed(row)
            await pilot.press("t", *row.tag, "enter")
            await _settle(pilot, lambda: type(app.screen).__name__ == "ReadingForm")
            await pilot.press(*f"{dp_bar:.2f}")
            before = watch.data
            for times in ui.values():
                times.clear()
            wall, cpu = await _timed(pilot, "enter", lambda b=before: watch_ready()
                                     and watch.data is not b and len(ui["paint"]) > 0)  # fmt: skip
            out["saves"].append({"wall": wall, "cpu": cpu, "show": ui["show"][0],
                                 "paint": ui["paint"][0], "save": sum(ui["save"]),
                                 "read": ui["read"][0] if ui["read"] else 0.0})  # fmt: skip
    app.book.close()
    return out


async def _drive_bare(rows: int, started: float) -> dict:
    from textual.app import App, ComposeResult
    from textual.binding import Binding
    from textual.containers import VerticalScroll
    from textual.screen import Screen
    from textual.widgets import DataTable, Footer, Header, Static

    class BareSheet(Screen[None]):
        """The widgets of a filter sheet, with made-up text in place of a book's: what
        Textual alone takes to show such a screen and to leave it."""

        BINDINGS = [Binding("escape", "app.pop_screen", "Back")]

        def compose(self) -> ComposeResult:
            yield Header()
            yield Static("FILTER U001-RF · return on U001", id="title")
            yield Static("Ref ν 30.1 mm²/s (50 °C) · limit/bypass/clean 2.50/3.50/0.40 bar")
            with VerticalScroll():
                yield Static("\n".join("⠀⡀⣀⣠⣤⣴⣶⣾⣿" * 16 for _ in range(12)), id="chart")
                for i in range(5):
                    yield Static(f"line {i}: " + "a sentence of the forecast " * 3)
                yield DataTable(id="elements", cursor_type="row")
            yield Footer()

        def on_mount(self) -> None:
            table = self.query_one(DataTable)
            table.add_columns(*(f"column {i}" for i in range(COLUMNS)))
            for _ in range(10):
                table.add_row("12 Jun", "14 Jul", "31 d", "limit", "yes", "62", "2.48", "", "B7")
            self.ready = True

    class BareTable(DataTable):
        """Textual's table, Home and End bound to its own first-row and last-row actions:
        the app's list jumps to its first and last row on those keys (RowTable), where
        DataTable's own Home and End scroll sideways, nothing on a table that fits."""

        BINDINGS = [
            Binding("home", "scroll_top", "First row", show=False),
            Binding("end", "scroll_bottom", "Last row", show=False),
        ]

    class Bare(App[None]):
        BINDINGS = [Binding("s", "save", "Save")]

        def on_data_table_row_selected(self) -> None:  # Enter on a row, as in the app
            sheet = BareSheet()
            sheet.ready = False
            self.push_screen(sheet)

        def action_save(self) -> None:
            """What a save is to a bare table (figure 10's baseline): one row's reading
            changed in place, and the rows put in order again."""
            table = self.query_one(DataTable)
            column = table.ordered_columns[2].key
            table.update_cell(str(rng.randrange(rows)), column, f"{rng.random():.2f} bar")
            table.sort(column)

        def compose(self) -> ComposeResult:
            yield Header()
            yield BareTable(id="t", cursor_type="row", zebra_stripes=True)
            yield Footer()

        def on_mount(self) -> None:
            table = self.query_one(DataTable)
            table.add_columns(*(f"column {i}" for i in range(COLUMNS)))
            for i in range(rows):
                table.add_row(f"U{i:03d}-RF", "12 Jun–14 Jun", f"{rng.random():.2f} bar",
                              "▁▂▃▅▆", "", f"U{i // 4:03d}", "return", "trend", "",
                              key=str(i))  # fmt: skip
            self.ready = True

    rng = random.Random(1)
    app = Bare()
    app.ready = False
    out: dict = {}
    async with app.run_test(size=SIZE) as pilot:
        await _painted(app, lambda: app.ready)
        out["start_to_paint_s"] = time.time() - started
        out["cpu_to_paint_s"] = time.process_time()  # the process's own CPU, threads included
        out["scroll"] = [await _timed(pilot, key, lambda: app.ready) for key in SCROLL_KEYS]
        sheet_ready = lambda: isinstance(app.screen, BareSheet) and app.screen.ready  # noqa: E731
        list_ready = lambda: not isinstance(app.screen, BareSheet)  # noqa: E731
        out["sheet"], out["back"] = [], []
        for _ in range(SHEETS):
            out["sheet"].append(await _timed(pilot, "enter", sheet_ready))
            out["back"].append(await _timed(pilot, "escape", list_ready))
        out["save"] = [await _timed(pilot, "s", lambda: app.ready) for _ in range(SAVES_IN_APP)]
    import resource

    out["max_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def _gc_read(path: Path, what: str, guard: str) -> dict:
    """Seconds of one long read in a fresh process: `full`, every entry of the book
    (`journal.read`), or `asof`, the whole plant's watch list as of the book's clock
    (`views.watch(as_of=...)`, which reads every filter's readings). `guard` "off" reads
    without `journal._no_gc_pauses` (the collector running as it always does)."""
    from contextlib import nullcontext

    from store import views
    from store.db.book import open_book
    from store.ledger import journal

    if guard == "off":
        journal._no_gc_pauses = nullcontext  # type: ignore[assignment]
    with open_book(path, create=False) as book:
        now = book.now()
        t, cpu = time.perf_counter(), time.process_time()
        if what == "full":
            count = len(journal.read(book))
        else:
            count = len(views.watch(book, as_of=now - timedelta(days=7)).filters)
        return {"s": time.perf_counter() - t, "cpu_s": time.process_time() - cpu, "n": count}


def gc_figures(path: Path, env: dict[str, str], runs: int) -> dict[str, dict[str, float]]:
    """Median seconds of each long read with the collector held (`_no_gc_pauses`, as the
    code has it) and without, each run in a fresh process, in turns."""
    out: dict[str, dict[str, float]] = {}
    for what in ("full", "asof"):
        times: dict[str, list[float]] = {"on": [], "off": []}
        for _ in range(runs):
            for guard in ("on", "off"):
                times[guard].append(_run_child("gc", str(path), what, guard, env=env)["s"])
        out[what] = {guard: _med(values) for guard, values in times.items()}
    return out


def _child(argv: list[str]) -> int:
    if argv[0] == "gc":
        print("SPEED " + json.dumps(_gc_read(Path(argv[1]), argv[2], argv[3])))
        return 0
    started = float(os.environ["SPEED_STARTED"])
    if argv[0] == "app":
        out = asyncio.run(_drive_app(Path(argv[1]), started))
    elif argv[0] == "saves":
        out = asyncio.run(_drive_saves(Path(argv[1]), int(argv[2])))
    else:
        out = asyncio.run(_drive_bare(int(argv[1]), started))
    print("SPEED " + json.dumps(out))
    return 0


def _run_child(*argv: str, env: dict[str, str]) -> dict:
    env = {**env, "SPEED_STARTED": repr(time.time())}
    done = subprocess.run([sys.executable, __file__, "--child", *argv], env=env,
                          capture_output=True, text=True, check=False)  # fmt: skip
    for line in done.stdout.splitlines():
        if line.startswith("SPEED "):
            return json.loads(line[6:])
    raise RuntimeError(f"child {argv} failed:\n{done.stdout[-2000:]}\n{done.stderr[-4000:]}")


# ---- the figures ---------------------------------------------------------------------------------


def _time_cmd(
    cmd: list[str], env: dict[str, str], runs: int, limit_s: float | None = None
) -> float:
    """Median seconds of `runs` runs; with limit_s, a run still going then is stopped and
    -limit_s returned (the figure is then "more than limit_s")."""
    times = []
    for _ in range(runs):
        t = time.perf_counter()
        try:
            subprocess.run(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                           check=True, timeout=limit_s)  # fmt: skip
        except subprocess.TimeoutExpired:
            return -float(limit_s)  # type: ignore[arg-type]
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def cli_saves(path: Path, env: dict[str, str], runs: int) -> dict[str, list[float]]:
    """`sumpbook log reading` on a copy of the book, a fresh process each time, in turns: with
    the check note a checked session left (the file as it left it) and without (the note
    deleted first: the whole-file check before the save, as every session ran it before the
    note). Wall seconds of each run."""
    work = Path(tempfile.mkdtemp(prefix="speed-saves-"))
    book = work / "book.db"
    shutil.copyfile(path, book)
    conn = sqlite3.connect(book)
    tags = [t for (t,) in conn.execute("SELECT tag FROM filters WHERE gauge = 1 "
                                       "ORDER BY tag LIMIT 20")]  # fmt: skip
    conn.close()
    cmd = [sys.executable, "-m", "tui", "--db", str(book), "log", "reading"]
    out: dict[str, list[float]] = {"noted": [], "checked": []}
    note = Path(f"{book}.checked")
    for i in range(2 * runs + 1):
        which = "checked" if i % 2 == 0 else "noted"
        if which == "checked":
            note.unlink(missing_ok=True)
        t = time.perf_counter()
        subprocess.run([*cmd, tags[i % len(tags)], "--dp", "0.9", "--temp", "45", "--as-read"],
                       env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                       check=True)  # fmt: skip
        if i:  # the first run makes the note the next one finds
            out[which].append(time.perf_counter() - t)
    shutil.rmtree(work, ignore_errors=True)
    return out


def cli_save_lines(saves: dict[str, list[float]]) -> list[str]:
    noted, checked = _med(saves["noted"]), _med(saves["checked"])
    return [
        "",
        "### A save from the command line (`sumpbook log reading`, a fresh process each)",
        "",
        f"With the check note of the session before: {noted:.2f} s (median of "
        f"{len(saves['noted'])}); with the whole-file check first (no note): {checked:.2f} s "
        f"(median of {len(saves['checked'])}); {checked / noted:.1f} × faster with the note.",
    ]


def machine() -> dict[str, str]:
    cpu = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = ""
    try:
        kb = int(Path("/proc/meminfo").read_text().split()[1])
        mem = f"{kb / 1024 / 1024:.1f} GiB"
    except (OSError, ValueError, IndexError):
        pass
    import textual

    return {
        "cpu": f"{cpu}, {os.cpu_count()} cores",
        "memory": mem,
        "os": f"{platform.system()} {platform.release()}",
        "python": platform.python_version(),
        "sqlite": sqlite3.sqlite_version,
        "textual": getattr(textual, "__version__", "?"),
    }


def book_facts(path: Path) -> dict:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    one = lambda sql: conn.execute(sql).fetchone()[0]  # noqa: E731
    facts = {
        "entries": one("SELECT count(*) FROM entries"),
        "readings": one("SELECT count(*) FROM entries WHERE kind = 'reading'"),
        "units": one("SELECT count(*) FROM units"),
        "filters": one("SELECT count(*) FROM filters"),
        "breathers": one("SELECT count(*) FROM breathers"),
        "first": one("SELECT min(at_utc) FROM entries"),
        "last": one("SELECT max(at_utc) FROM entries"),
        "size_mb": path.stat().st_size / 1e6,
    }
    conn.close()
    return facts


def copy_book(path: Path, copy: Path) -> Path:
    """A copy of the book file and its write-ahead log, if it has one (nothing has it open
    for writing while the benchmark runs)."""
    for suffix in ("", "-wal"):
        if Path(str(path) + suffix).exists():
            shutil.copyfile(str(path) + suffix, str(copy) + suffix)
    return copy


def warm(path: Path) -> None:
    for suffix in ("", "-wal"):
        f = Path(str(path) + suffix)
        if f.exists():
            with f.open("rb") as fh:
                while fh.read(1 << 24):
                    pass


def saves(path: Path, count: int) -> list[float]:
    """ms per record.log of a reading (validation, insert, status and unit refresh, commit)
    on a copy of the book, on filters picked at random, at the book's clock."""
    from store import record
    from store.db.book import open_book
    from store.ledger.entries import Reading
    from store.ledger.register import FilterPosition, Technician, list_all

    with tempfile.TemporaryDirectory(dir=path.parent) as folder:
        copy = copy_book(path, Path(folder) / "saves.db")
        times = []
        with open_book(copy, create=False) as book:
            book.ensure_checked()  # the whole-file check before the first write, not timed:
            record.preload()  # the app runs it behind the painted list
            tech = list_all(book, Technician)[0].tag
            filters = [f for f in list_all(book, FilterPosition) if f.gauge]
            rng = random.Random(4)
            now = book.now()
            for i in range(count):
                pos = rng.choice(filters)
                reading = Reading(filter=pos.tag, dp_bar=round(rng.uniform(0.3, 0.9) * pos.limit_bar, 2),
                                  temp_c=50.0, by=tech, at=now - timedelta(minutes=count - i))  # fmt: skip
                t = time.perf_counter()
                record.log(book, reading)
                times.append(1000 * (time.perf_counter() - t))
        return times


# `--only-saves`: run in a fresh process of each code (its folder first on sys.path), so
# that older code without this script can be measured: the saves of `saves` above, each
# timed as the process's CPU (time.process_time) and wall time.
_SAVES_CHILD = """
import json, random, shutil, sys, tempfile, time
from datetime import timedelta
from pathlib import Path
from store import record
from store.db.book import open_book
from store.ledger.entries import Reading
from store.ledger.register import FilterPosition, Technician, list_all
path, count = Path(sys.argv[1]), int(sys.argv[2])
cpu, wall = [], []
with tempfile.TemporaryDirectory(dir=path.parent) as folder:
    copy = Path(folder) / "saves.db"
    for suffix in ("", "-wal"):
        if Path(str(path) + suffix).exists():
            shutil.copyfile(str(path) + suffix, str(copy) + suffix)
    with open_book(copy, create=False) as book:
        book.ensure_checked()
        record.preload()
        tech = list_all(book, Technician)[0].tag
        filters = [f for f in list_all(book, FilterPosition) if f.gauge]
        rng = random.Random(4)
        now = book.now()
        for i in range(count):
            pos = rng.choice(filters)
            reading = Reading(filter=pos.tag, dp_bar=round(rng.uniform(0.3, 0.9) * pos.limit_bar, 2),
                              temp_c=50.0, by=tech, at=now - timedelta(minutes=count - i))
            c, t = time.process_time(), time.perf_counter()
            record.log(book, reading)
            cpu.append(1000 * (time.process_time() - c))
            wall.append(1000 * (time.perf_counter() - t))
print("SPEED " + json.dumps({"cpu_ms": cpu, "wall_ms": wall}))
"""


def save_cpu(books: dict[str, tuple[Path, Path]], env: dict[str, str], runs: int,
             count: int) -> dict[str, list[dict]]:  # fmt: skip
    """Figure 4 as CPU: for each code (name -> (its checkout, its book as that code keeps
    it)), `runs` fresh processes, in turns, each saving `count` readings on a fresh copy."""
    out: dict[str, list[dict]] = {name: [] for name in books}
    for _ in range(runs):
        for name, (root, book) in books.items():
            python = root / ".venv" / "bin" / "python"
            cmd = [str(python if python.exists() else sys.executable), "-c", _SAVES_CHILD,
                   str(book), str(count)]  # fmt: skip
            done = subprocess.run(cmd, env={**env, "PYTHONPATH": str(root)}, cwd=root,
                                  capture_output=True, text=True, check=True)  # fmt: skip
            line = [x for x in done.stdout.splitlines() if x.startswith("SPEED ")][-1]
            out[name].append(json.loads(line[6:]))
    return out


def save_cpu_lines(figures: dict[str, list[dict]], runs: int, count: int) -> list[str]:
    """The medians per run (the first save of each left out: the first write's work), and
    each save's least CPU over the runs, compared save by save with the first code's."""
    names = list(figures)
    best = {n: [min(r["cpu_ms"][i] for r in figures[n]) for i in range(1, count)] for n in names}
    lines = [
        f"Saving one reading (figure 4 as CPU; {runs} processes of each code in turns, "
        f"{count - 1} saves each after the first):",
        "",
        "| code | CPU per save, median of each run (ms) | median of runs | wall median | "
        "least of the runs, median save | its sum | save by save ÷ first code |",
        "|---|---|---|---|---|---|---|",
    ]
    for n in names:
        per_run = [_med(r["cpu_ms"][1:]) for r in figures[n]]
        wall = _med([_med(r["wall_ms"][1:]) for r in figures[n]])
        ratio = _med([b / a for a, b in zip(best[names[0]], best[n], strict=True)])
        lines.append(
            f"| {n} | {', '.join(f'{v:.1f}' for v in per_run)} | {_med(per_run):.1f} | "
            f"{wall:.1f} | {_med(best[n]):.1f} | {sum(best[n]):.0f} | {ratio:.3f} |"
        )
    return lines


def store_calls(path: Path, repeat: int = 5) -> dict[str, float]:
    """ms of the store calls behind the screens, each on a fresh read-only connection (as the
    app's worker threads have), median of `repeat`."""
    from store import sheets, views
    from store.db.book import Book
    from store.derived import statuscache
    from store.health.conditions import contexts

    statuscache.preload()
    conn0 = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    tags = [t for (t,) in conn0.execute("SELECT tag FROM filters ORDER BY tag")]
    conn0.close()
    rng = random.Random(8)

    def fresh() -> Book:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, isolation_level=None)
        return Book(conn=conn, path=path, readonly=True)

    def timed(call, times_: int = repeat) -> float:
        times = []
        for _ in range(times_):
            book = fresh()
            t = time.perf_counter()
            call(book)
            times.append(1000 * (time.perf_counter() - t))
            book.close()
        return statistics.median(times)

    ctxs = None

    def recompute(book: Book) -> None:  # what a row that does not hold costs
        nonlocal ctxs
        ctxs = ctxs or list(contexts(book).values())
        statuscache.live_status(book, rng.choice(ctxs))

    def same_rows(book: Book) -> None:  # what views.watch reads, in one query each
        book.conn.execute(
            "SELECT filter, key, computed_utc, newest_utc, data FROM status_cache"
        ).fetchall()
        book.conn.execute(
            "SELECT unit, key, computed_utc, until_utc, data FROM unit_cache"
        ).fetchall()

    out = {
        "recompute": timed(recompute, 3 * repeat),
        "watch": timed(lambda b: views.watch(b), 3 * repeat),
        "watch_query": timed(same_rows, 3 * repeat),
        "filter_sheet": timed(lambda b: sheets.filter_sheet(b, rng.choice(tags)), 4 * repeat),
    }
    return out


def python(root: Path) -> str:
    """The interpreter of the code at `root`: its own virtual environment's, else this one."""
    venv = root / ".venv" / "bin" / "python"
    return str(venv) if venv.exists() else sys.executable


def entries_only(root: Path, env: dict[str, str]) -> list[str]:
    """`--entries-only` when the code at `root` knows it (the status rows after the entries
    came with it): the entries alone, the rows the sqlite3 shell writes and the file older
    code writes."""
    done = subprocess.run([python(root), "-m", "tui", "export", "--help"], env={**env,
                          "PYTHONPATH": str(root)}, cwd=root, capture_output=True, text=True,
                          check=False)  # fmt: skip
    return ["--entries-only"] if "--entries-only" in done.stdout else []


def export_year(path: Path, env: dict[str, str], runs: int, limit_s: float) -> dict:
    """The book's last year as CSV: `sumpbook export --entries-only` and the sqlite3 shell's
    CSV of the same rows, in turns (`runs` each, medians), after one in-process run of the
    writing alone; then once with the status rows of the handover (the default)."""
    from store.base.prefs import Prefs
    from store.base.timeutil import format_utc, parse_time
    from store.db.book import open_book
    from store.exchange.csvexport import write_span

    out: dict = {}
    with open_book(path, create=False) as book:
        local, end = book.local_zone(), book.now()
        last = end.astimezone(local).date()
        start_text, end_text = f"{last.replace(year=last.year - 1)}T00:00", f"{last}T00:00"
        start, stop = parse_time(start_text, local, now=end), parse_time(end_text, local, now=end)
        start_utc, end_utc = format_utc(start), format_utc(stop)
        pattern = book.shift_pattern()
        with open(os.devnull, "w", encoding="utf-8", newline="") as sink:  # the writing alone
            t = time.perf_counter()
            write_span(sink, book, start, stop, Prefs(), local, pattern)
            out["in_process_s"] = time.perf_counter() - t
    out |= {"from": start_text, "to": end_text}
    shell = shutil.which("sqlite3")
    with tempfile.TemporaryDirectory() as folder:
        csv_path = Path(folder) / "year.csv"
        cmd = [sys.executable, "-m", "tui", "--db", str(path), "export", "--from", start_text,
               "--to", end_text, "--force", "-o", str(csv_path)]  # fmt: skip
        sql = (
            f"SELECT e.*, v.id AS voided_by FROM entries e LEFT JOIN entries v ON v.voids = e.id "
            f"WHERE e.at_utc >= '{start_utc}' AND e.at_utc < '{end_utc}' "
            "ORDER BY e.at_utc, e.rowid;"
        )
        shell_csv = Path(folder) / "shell.csv"
        shell_cmd = [
            "sh",
            "-c",
            f"{shell} -readonly -csv -header '{path}' \"{sql}\" > '{shell_csv}'",
        ]
        ours, theirs = [], []
        only = entries_only(ROOT, env)
        for _ in range(runs):  # in turns, so that a slow spell of the machine hits both
            ours.append(_time_cmd([*cmd, *only], env, 1, limit_s))
            if ours[-1] < 0:  # stopped at the limit
                break
            if shell is not None:
                theirs.append(_time_cmd(shell_cmd, env, 1))
        out["stopped"] = ours[-1] < 0
        out["sumpbook_s"] = abs(ours[-1]) if out["stopped"] else statistics.median(ours)
        out["sumpbook_runs"] = ours
        out["rows"] = (
            sum(1 for _ in csv_path.open(encoding="utf-8")) - 1 if csv_path.exists() else None
        )
        out["with_status_s"] = abs(_time_cmd(cmd, env, 1, limit_s))
        out["with_status_rows"] = (
            sum(1 for line in csv_path.open(encoding="utf-8") if ",status," in line)
            if csv_path.exists()
            else None
        )
        if shell is None:
            out["shell_s"] = None
            return out
        out["shell_s"] = statistics.median(theirs)
        out["shell_runs"] = theirs
        out["shell_rows"] = sum(1 for _ in shell_csv.open(encoding="utf-8")) - 1
    return out


def same_answers(path: Path, env: dict[str, str], roots: dict[str, Path], span: dict) -> list[str]:
    """`cmp` of `status --json` and of the export, each code in `roots` against the first,
    on the demo plant (as made, no kept rows, and after `rebuild`) and on the book at PATH
    (its kept rows as they are; the export of the year in `span`). Each run reads its own
    fresh copy. Lines for the report."""
    work = Path(tempfile.mkdtemp(prefix="speed-cmp-"))
    first = next(iter(roots.values()))

    demo = work / "demo.db"
    subprocess.run([python(first), "-m", "tui", "--db", str(demo), "demo"], env=env, cwd=first,
                   check=True, stdout=subprocess.DEVNULL)  # fmt: skip
    kept = work / "demo-kept.db"
    shutil.copyfile(demo, kept)
    subprocess.run([python(first), "-m", "tui", "--db", str(kept), "rebuild"], env=env, cwd=first,
                   check=True, stdout=subprocess.DEVNULL)  # fmt: skip
    whole = ["--from", "2020-01-01T00:00"]
    books = {"demo, no kept rows": (demo, whole), "demo, kept rows": (kept, whole),
             "this book": (path, ["--from", span["from"], "--to", span["to"]])}  # fmt: skip
    lines = []
    for label, (book, export_args) in books.items():
        outputs: dict[str, dict[str, bytes]] = {}
        for name, root in roots.items():
            copy = copy_book(book, work / "copy.db")
            run_env = {**env, "PYTHONPATH": str(root)}
            base = [python(root), "-m", "tui", "--db", str(copy)]
            status = subprocess.run([*base, "status", "--json"], env=run_env, cwd=root,
                                    check=True, capture_output=True).stdout  # fmt: skip
            csv_path = work / f"{name}.csv"
            csv_path.unlink(missing_ok=True)  # the last book's: export refuses to overwrite
            subprocess.run([*base, "export", *export_args, *entries_only(root, env), "-o",
                            str(csv_path)], env=run_env, cwd=root, check=True,
                           capture_output=True)  # fmt: skip
            outputs[name] = {"status --json": status, "export": csv_path.read_bytes()}
            csv_path.unlink()  # the next book's export to the same name: export asks first
            for suffix in ("", "-wal", "-shm"):
                Path(str(copy) + suffix).unlink(missing_ok=True)
        names = list(outputs)
        for what in ("status --json", "export"):
            ref = outputs[names[0]][what]
            for other in names[1:]:
                same = outputs[other][what] == ref
                lines.append(
                    f"| {label} | `{what}` | {len(ref):,} bytes | {other} | "
                    f"{'identical' if same else 'DIFFERENT'} |"
                )
    shutil.rmtree(work, ignore_errors=True)
    return lines


def later_on(path: Path, env: dict[str, str], runs: int, roots: dict[str, Path]) -> dict:
    """Figure 7 for each code in `roots` (name -> checkout with .venv): seconds of
    `status --json` right after a rebuild at the book's frozen clock, a week and a year
    after it, and of `status --json --as-of` that clock. Each run reads a fresh copy made
    from that code's rebuilt book (code that keeps rows as it reads cannot help itself)."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    clock = conn.execute("SELECT value FROM settings WHERE key = 'clock'").fetchone()[0]
    conn.close()
    from store.base.timeutil import format_utc, parse_utc

    frozen = parse_utc(clock)
    work = Path(tempfile.mkdtemp(prefix="speed-later-"))
    books, pythons = {}, {}
    for name, root in roots.items():
        python = root / ".venv" / "bin" / "python"
        pythons[name] = str(python if python.exists() else sys.executable)
        kept = work / f"{name}.db"
        shutil.copyfile(path, kept)
        cmd = [pythons[name], "-m", "tui", "--db", str(kept), "rebuild"]
        subprocess.run(cmd, env={**env, "PYTHONPATH": str(root)}, cwd=root, check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)  # fmt: skip
        books[name] = kept
    cases = {
        "now": (frozen, []),
        "week": (frozen + timedelta(days=7), []),
        "year": (frozen + timedelta(days=365), []),
        "as_of": (frozen + timedelta(days=7), ["--as-of", clock]),
    }
    times: dict[str, dict[str, list[float]]] = {n: {c: [] for c in cases} for n in roots}
    copy = work / "run.db"
    for _ in range(runs):
        for case, (now, extra) in cases.items():
            for name, root in roots.items():  # in turns, each on a fresh copy
                shutil.copyfile(books[name], copy)
                if case != "now":
                    c = sqlite3.connect(copy)
                    c.execute("DELETE FROM settings WHERE key = 'clock'")
                    c.commit()
                    c.close()
                run_env = {**env, "PYTHONPATH": str(root), "SUMPBOOK_NOW": format_utc(now)}
                cmd = [pythons[name], "-m", "tui", "--db", str(copy), "status", "--json", *extra]
                t = time.perf_counter()
                subprocess.run(cmd, env=run_env, cwd=root, check=True,
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)  # fmt: skip
                times[name][case].append(time.perf_counter() - t)
    shutil.rmtree(work, ignore_errors=True)
    return {n: {c: _med(v) for c, v in cases_.items()} for n, cases_ in times.items()}


def later_lines(later: dict, runs: int) -> list[str]:
    names = list(later)
    lines = [
        "",
        f"Later on (figure 7; median of {runs} runs, each on a fresh copy of the book as that "
        "code's `sumpbook rebuild` kept it at the frozen clock):",
        "",
        "| `sumpbook status --json` | " + " | ".join(names) + " |",
        "|---" * (len(names) + 1) + "|",
    ]
    for case, words in (
        ("now", "right after the caches were kept"),
        ("week", "a week after the last entry"),
        ("year", "a year after the last entry"),
        ("as_of", "`--as-of` the last entry, whole plant"),
    ):
        cells = " | ".join(f"{later[n][case]:.2f} s" for n in names)
        lines.append(f"| {words} | {cells} |")
    return lines


def issue_table(f: dict, app_s: float, bare_s: float) -> list[str]:
    """The speed goal's table, each row against its baseline from this run, held or missed."""
    cpu = f["cpu"]
    scroll = _med(cpu["scroll"]) / _med(cpu["bare"])
    sheet = _med(cpu["sheet"]) / _med(cpu["bare_sheet"]) if cpu["sheet"] else float("nan")
    watch_ms, query_ms = f["calls"]["watch"], f["calls"]["watch_query"]
    rows = [
        ("app start → painted list", f"{app_s:.2f} s", f"bare Textual table app, same rows, "
         f"{bare_s:.2f} s", f"{f['app']:.2f}×", "≤ 1.5×", f["app"] <= TARGETS["app"]),
        ("`status --json`", f"{f['status_s']:.3f} s", f"a bare Python sqlite3 query, "
         f"{f['query_s']:.3f} s", f"{f['status']:.2f}×", "≤ 3×", f["status"] <= TARGETS["status"]),
    ]  # fmt: skip
    if f["export"] is not None:
        rows.append((f"export a year ({f['export_rows']:,} rows)", f"{f['export_s']:.1f} s",
                     f"sqlite3 shell, {f['shell_s']:.1f} s", f"{f['export']:.2f}×", "≤ 2.5×",
                     f["export"] <= TARGETS["export"]))  # fmt: skip
    else:
        rows.append(("export a year", f"{f['export_s']:.1f} s", "sqlite3 shell not installed",
                     "–", "≤ 2.5×", None))  # fmt: skip
    rows += [
        ("scroll the watch list, CPU per key", f"median {_med(cpu['scroll']):.0f}, max "
         f"{max(cpu['scroll']):.0f} ms", f"bare table {_med(cpu['bare']):.0f} / "
         f"{max(cpu['bare']):.0f} ms", f"{scroll:.2f}×", "≤ 2× the bare table",
         scroll <= TARGETS["scroll"]),
        ("open a filter sheet, CPU", f"median {_med(cpu['sheet']):.0f} ms", "bare screen with "
         f"the same widgets {_med(cpu['bare_sheet']):.0f} ms", f"{sheet:.2f}×", "≤ 1.2×",
         sheet <= TARGETS["sheet"]),
        (f"`views.watch` from the caches, {f['facts']['filters']} filters + "
         f"{f['facts']['units']} units", f"{watch_ms:.0f} ms", "reading the same rows with one "
         f"query, {query_ms:.1f} ms", f"{watch_ms / query_ms:.1f}×", "≤ 25 ms",
         watch_ms <= TARGETS["watch_ms"]),
    ]  # fmt: skip
    out = [
        "",
        "The speed goal (issue 21), each figure against its baseline from this run:",
        "",
        "| figure | sumpbook | baseline | ratio | target | verdict |",
        "|---|---|---|---|---|---|",
    ]
    for label, ours, base, ratio, target, ok in rows:
        verdict_text = "skipped" if ok is None else ("held" if ok else "MISSED")
        out.append(f"| {label} | {ours} | {base} | {ratio} | {target} | {verdict_text} |")
    return out


def gc_lines(hold: dict[str, dict[str, float]], runs: int) -> list[str]:
    """Figure 8: why the long reads hold the collector (journal._no_gc_pauses)."""
    words = {"full": "every entry of the book (`journal.read`)",
             "asof": "the whole plant a week before the book's clock (`views.watch(as_of=)`)"}  # fmt: skip
    out = [
        "",
        f"Long reads with the cyclic collector held while their rows are built "
        f"(`journal._no_gc_pauses`, as shipped) and without (figure 8; median of {runs} "
        "fresh processes each, in turns):",
        "",
        "| read | held | not held | not held / held |",
        "|---|---|---|---|",
    ]
    for what, t in hold.items():
        out.append(f"| {words[what]} | {t['on']:.2f} s | {t['off']:.2f} s | "
                   f"{t['off'] / t['on']:.2f} |")  # fmt: skip
    return out


def app_only_text(app_runs: list[dict], bare_runs: list[dict]) -> str:
    """`--only-app`: the app's figures against the bare app's, for a quick look."""

    def actions(runs: list[dict], key: str) -> list[float]:
        return [c for r in runs for _, c in r.get(key, [])]

    app_s = _med([r["start_to_paint_s"] for r in app_runs])
    bare_s = _med([r["start_to_paint_s"] for r in bare_runs])
    start_cpu = _med([r["cpu_to_paint_s"] for r in app_runs])
    start_cpu_bare = _med([r["cpu_to_paint_s"] for r in bare_runs])
    scroll, bare_scroll = actions(app_runs, "scroll"), actions(bare_runs, "scroll")
    sheet, bare_sheet = actions(app_runs, "sheet"), actions(bare_runs, "sheet")
    rows = [
        ("app start → painted list, wall", app_s, bare_s, TARGETS["app"]),
        ("app start → painted list, CPU", start_cpu, start_cpu_bare, TARGETS["app"]),
        ("scroll the watch list, CPU per key (median)", _med(scroll), _med(bare_scroll),
         TARGETS["scroll"]),
        ("open a filter sheet, CPU (median)", _med(sheet), _med(bare_sheet), TARGETS["sheet"]),
    ]  # fmt: skip
    out = ["| figure | sumpbook | bare | ratio | target | verdict |", "|---|---|---|---|---|---|"]
    for label, ours, bare, target in rows:
        ratio = ours / bare
        out.append(f"| {label} | {ours:.3g} | {bare:.3g} | {ratio:.2f}× | ≤ {target}× | "
                   f"{'held' if ratio <= target else 'MISSED'} |")  # fmt: skip
    out.append(f"scroll keys, CPU ms: app max {max(scroll):.0f}, bare max {max(bare_scroll):.0f}; "
               f"runs: {len(app_runs)} of each, in turns")  # fmt: skip
    return "\n".join(out)


def list_save_lines(save_runs: list[dict], bare_runs: list[dict]) -> list[str]:
    """Figure 10: a reading saved in the app to its list painted, against a bare table that
    changes one cell and sorts its rows again (no target: reported)."""
    saves = [s for run in save_runs for s in run["saves"]]
    bare = [c for run in bare_runs for _, c in run.get("save", [])]
    if not saves or not bare:
        return ["", "Figure 10 (a save to its list painted): no saves were timed."]
    cpu, bare_cpu = _med([s["cpu"] for s in saves]), _med(bare)
    show, paint = [s["show"] for s in saves], [s["paint"] for s in saves]
    bare_wall = _med([w for run in bare_runs for w, _ in run.get("save", [])])
    return [
        "",
        "### A reading saved in the app, to its list painted (no target)",
        "",
        f"{len(saves)} readings typed into the app's form ({len(save_runs)} runs on a copy of "
        "the book), each from the Enter that saves it to the list showing it, painted: wall "
        f"median {_med([s['wall'] for s in saves]):.0f} ms (longest "
        f"{max(s['wall'] for s in saves):.0f} ms; through Pilot, whose pauses add to it: the "
        f"bare table's key below takes {bare_wall:.0f} ms so), CPU of the process median "
        f"{cpu:.0f} ms (the save, its forecast update and the list read again run in worker "
        f"threads: `record.save` median {_med([s['save'] for s in saves]):.0f} ms, "
        f"`read_watch` {_med([s['read'] for s in saves]):.0f} ms). Of it, the UI thread: median "
        f"{_med(show):.1f} ms putting the list in place "
        f"(`show_data`; longest {max(show):.0f} ms), {_med(paint):.1f} ms from there to the "
        "screen refreshed. A bare DataTable of as many rows that changes one cell and sorts "
        f"its rows again takes median {bare_cpu:.1f} ms of CPU to the screen refreshed "
        f"({len(bare)} keys); the UI thread's part of a save is "
        f"{(_med(show) + _med(paint)) / bare_cpu:.2f} × that.",
    ]


def percentile(values: list[float], p: float) -> float:
    ordered = sorted(values)
    k = (len(ordered) - 1) * p / 100
    lo, hi = int(k), min(int(k) + 1, len(ordered) - 1)
    return ordered[lo] + (ordered[hi] - ordered[lo]) * (k - lo)


def verdict(ok: bool) -> str:
    return "holds" if ok else "MISSED"


def notes(f: dict) -> list[str]:
    """Which targets hold, and for those that do not, where the time goes (from this run's
    own figures; what is not measured here is said to come from a profile)."""
    out = ["", "## Targets", ""]
    out.append(
        f"- App start ≤ 1.5 × bare: {verdict(f['app'] <= TARGETS['app'])} ({f['app']:.2f}×). "
        f"The app has its modules imported {f['imported_s']:.2f} s after the process starts "
        f"(the bare app: Textual only); the list is read from the caches "
        f"({f['calls']['watch']:.0f} ms for status.watch) in a thread while Textual "
        "starts, "
        f"and a DataTable of {f['rows']} rows measures every cell, as the bare app's does. "
        f"The whole-file check runs behind the painted list ({f['check_s']:.1f} s, with the "
        "fitting maths loaded after it); a save made before it ends waits for it."
    )
    out.append(
        f"- `status --json` ≤ 3 × a bare query: {verdict(f['status'] <= TARGETS['status'])} "
        f"({f['status']:.2f}×). Of the bare query's {1000 * f['query_s']:.0f} ms, "
        f"{1000 * f['python_s']:.0f} ms is starting the interpreter (`python -c pass`). The "
        f"command's {1000 * f['status_s']:.0f} ms: the interpreter and the modules it loads "
        f"({1000 * f['imports_s']:.0f} ms for `python -c 'import gc; gc.disable(); import "
        "tui.cli.commands, store.views'`, as tui/launch.py loads them), then the watch list "
        f"from the caches ({f['calls']['watch']:.0f} ms in a process that has read nothing "
        "yet) and the JSON. Three times the bare query leaves a Python program of this size "
        f"about {1000 * (3 * f['query_s'] - f['python_s']):.0f} ms beyond the interpreter's "
        "start. For context (no target): a bare program that reads every kept filter and unit "
        "row and writes them out as one JSON text, about as many bytes as the answer, takes "
        f"{1000 * f['dump_s']:.0f} ms; `status --json` is "
        f"{f['status_s'] / f['dump_s']:.2f} × that."
    )
    if f["export"] is not None:
        out.append(
            f"- Export ≤ 2.5 × the sqlite3 shell: {verdict(f['export'] <= TARGETS['export'])} "
            f"({f['export']:.2f}×), in one process ({f['export_write_s']:.1f} s of it writing "
            "the lines to /dev/null in this process)."
        )
    else:
        out.append("- Export: the sqlite3 shell is not installed, so this ratio was skipped.")
    out.append(
        f"- Peak memory < 250 MB: {verdict(f['memory'] < TARGETS['memory_mb'])} "
        f"({f['memory']:.0f} MB)."
    )
    for key, what in (("scroll", "Scrolling"), ("sheet", "Opening a filter sheet"),
                      ("back", "Back to the list")):  # fmt: skip
        cpu = f["cpu"][key]
        out.append(
            f"- {what} < 100 ms per key (CPU): {verdict(max(cpu) < TARGETS['action_ms'])} "
            f"(median {_med(cpu):.0f} ms, longest {max(cpu):.0f} ms)."
        )
    out.append(
        f"  The bare DataTable app takes median {_med(f['cpu']['bare']):.0f} ms, longest "
        f"{max(f['cpu']['bare']):.0f} ms for the same scroll keys: the longest are End and "
        "PgDn, which redraw the whole table in both. A filter sheet's data takes "
        f"{f['calls']['filter_sheet']:.0f} ms (`sheets.filter_sheet`, median, mostly the "
        "forecast, in a worker thread); the rest is Textual switching screens and drawing them: "
        f"the bare app takes median {_med(f['cpu']['bare_sheet']):.0f} ms to show a screen "
        f"with a sheet's widgets and made-up text, {_med(f['cpu']['bare_back']):.0f} ms to "
        "leave it; the app's sheet has more to draw (the chart, longer texts) and its data "
        "to read and compute in a worker thread, all counted in its CPU time."
    )
    out.append(
        f"- Saving a reading (no target): median {_med(f['save_ms']):.0f} ms, p99 "
        f"{percentile(f['save_ms'], 99):.0f} ms, the forecast update and the commit included."
    )
    out.append(
        f"- Not in the targets: a status row whose key no longer holds (a like position's "
        f"lives or the register changed, an old format) is recomputed "
        f"({f['calls']['recompute']:.0f} ms each, about "
        f"{f['calls']['recompute'] * f['facts']['filters'] / 1000:.0f} s for all "
        f"{f['facts']['filters']}); age alone never makes a row fail its key (figure 7)."
    )
    return out


def _years(facts: dict) -> str:
    """The book's span in whole years, as make_big_logbook.py was given it."""
    from datetime import date

    days = (date.fromisoformat(facts["last"][:10]) - date.fromisoformat(facts["first"][:10])).days
    return f"{days / 365.25:.0f}"


def export_lines(export: dict, facts: dict, host: dict[str, str], runs: int) -> list[str]:
    """Figure 3 alone, for --only-export."""
    lines = [
        f"Book: {facts['entries']:,} entries, {facts['filters']} filter positions. Machine: "
        f"{host['cpu']}, Python {host['python']}, SQLite {host['sqlite']} (shared and loaded: "
        "read the ratio, not the seconds).",
        f"Export {export['from']} to {export['to']}: `sumpbook export --entries-only` "
        f"{export['sumpbook_s']:.2f} s (median of {len(export['sumpbook_runs'])}: "
        + ", ".join(f"{t:.2f}" for t in export["sumpbook_runs"])
        + f"), {export['rows']:,} rows; writing alone in process {export['in_process_s']:.2f} s.",
    ]
    if export.get("shell_s"):
        ratio = export["sumpbook_s"] / export["shell_s"]
        lines.append(
            f"sqlite3 -csv shell, same rows ({export['shell_rows']:,}): {export['shell_s']:.2f} s "
            f"(median of {len(export['shell_runs'])}: "
            + ", ".join(f"{t:.2f}" for t in export["shell_runs"])
            + f"); ratio {ratio:.2f} (target ≤ {TARGETS['export']}: "
            + f"{verdict(ratio <= TARGETS['export'])})."
        )
    lines.append(
        f"With the status rows of the handover (the default): {export['with_status_s']:.1f} s, "
        f"{export['with_status_rows']} status rows."
    )
    if runs:
        lines.append("")
    return lines


def _med(values: list[float]) -> float:
    return statistics.median(values) if values else float("nan")


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv and argv[0] == "--child":
        return _child(argv[1:])
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("path", type=Path)
    parser.add_argument("--out", type=Path, default=Path("/tmp/speed_figures.md"))
    parser.add_argument("--saves", type=int, default=120, help="readings saved (120)")
    parser.add_argument("--runs", type=int, default=5, help="runs of each process timed (5)")
    parser.add_argument("--app-runs", type=int, default=3, help="app runs, each kind (3)")
    parser.add_argument(
        "--export-limit", type=float, default=150.0,
        help="stop the year's export after this many seconds and report it as more (150)",
    )  # fmt: skip
    parser.add_argument(
        "--build", nargs=2, type=float, metavar=("N_UNITS", "YEARS"),
        help="make the book first if PATH does not exist (e.g. --build 200 5)",
    )  # fmt: skip
    parser.add_argument(
        "--compare", type=Path, metavar="DIR",
        help="figure 7 also for the code checked out in DIR (with DIR/.venv), e.g. main",
    )  # fmt: skip
    parser.add_argument("--only-later", action="store_true", help="figure 7 alone")
    parser.add_argument("--only-cli-saves", action="store_true",
                        help="saves from the command line with and without the check note "
                        "(figure 9) alone")  # fmt: skip
    parser.add_argument(
        "--only-export", action="store_true",
        help="figure 3 alone (and, with --compare, the `cmp` of the outputs)",
    )  # fmt: skip
    parser.add_argument("--no-later", action="store_true", help="leave figure 7 out")
    parser.add_argument(
        "--only-saves", action="store_true",
        help="figure 4 alone, as CPU per save, in turns with --compare DIR on --compare-book",
    )  # fmt: skip
    parser.add_argument(
        "--compare-book", type=Path, metavar="FILE",
        help="--only-saves: the book as the compared code keeps it (default: PATH)",
    )  # fmt: skip
    parser.add_argument(
        "--only-app",
        action="store_true",
        help="figures 1 and 6 alone (the app and the bare app, in turns)",
    )
    parser.add_argument("--gc-runs", type=int, default=3,
                        help="runs of each long read with and without the held collector "
                        "(figure 8; 0 leaves it out)")  # fmt: skip
    args = parser.parse_args(argv)
    path = args.path.resolve()
    began = time.perf_counter()
    if not path.exists():
        if not args.build:
            parser.error(f"{path} does not exist: give --build N_UNITS YEARS")
        from store.base.timeutil import parse_utc
        from tests.benchmarks.make_big_logbook import DEFAULT_END, build

        made = build(int(args.build[0]), args.build[1], path, 4406, parse_utc(DEFAULT_END))
        print(f"built {path} in {made['total_s']:.0f} s", flush=True)
    home = Path(tempfile.mkdtemp(prefix="speed-"))
    env = {**os.environ, "SUMPBOOK_CONFIG": str(home / "prefs.json"), "PYTHONPATH": str(ROOT),
           "TERM": "xterm-256color"}  # fmt: skip
    env.pop("PYTHONDONTWRITEBYTECODE", None)  # as installed: compiled modules are kept
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    tech = conn.execute("SELECT tag FROM technicians ORDER BY tag LIMIT 1").fetchone()[0]
    conn.close()
    (home / "prefs.json").write_text(json.dumps({"tech": tech}), encoding="utf-8")

    facts, host = book_facts(path), machine()
    print(f"book: {facts}\nmachine: {host}", flush=True)
    warm(path)
    roots = {"this code": ROOT}
    if args.compare:
        roots[f"{args.compare.name} (compared)"] = args.compare.resolve()
    if args.only_saves:
        books = {"this code": (ROOT, path)}
        if args.compare:
            books[f"{args.compare.name} (compared)"] = (
                args.compare.resolve(),
                (args.compare_book or path).resolve(),
            )
        count = max(args.saves, 2)
        text = "\n".join(save_cpu_lines(save_cpu(books, env, args.runs, count), args.runs, count))
        args.out.write_text(text + "\n", encoding="utf-8")
        print(text)
        shutil.rmtree(home, ignore_errors=True)
        return 0
    if args.only_cli_saves:
        text = "\n".join(cli_save_lines(cli_saves(path, env, args.runs)))
        args.out.write_text(text + "\n", encoding="utf-8")
        print(text)
        shutil.rmtree(home, ignore_errors=True)
        return 0
    if args.only_later:
        later = later_on(path, env, args.runs, roots)
        text = "\n".join(
            [f"Book: {facts['entries']:,} entries, {facts['filters']} filter positions."]
            + later_lines(later, args.runs)
        )
        args.out.write_text(text + "\n", encoding="utf-8")
        print(text)
        return 0

    if args.only_export:
        export = export_year(path, env, args.runs, args.export_limit)
        answers = same_answers(path, env, roots, export) if args.compare else []
        text = "\n".join(export_lines(export, facts, host, args.runs) + answers)
        args.out.write_text(text + "\n", encoding="utf-8")
        print(text)
        shutil.rmtree(home, ignore_errors=True)
        return 0

    # The app and the bare app take turns, so that a slow spell of the machine hits both.
    app_runs, bare_runs = [], []
    # Every app run opens its SHEETS filter sheets, as every bare run opens its screens: the
    # sheet's figure is a median over as many openings on both sides (it was three of the
    # app's, the first building the kept screen, against nine of the bare app's).
    # Figure 10 saves readings: on a copy of the book, made once (each run adds its own).
    saves_copy = copy_book(path, home / "saves.db")
    save_runs = []
    for _ in range(args.app_runs):
        app_runs.append(_run_child("app", str(path), env=env))
        bare_runs.append(_run_child("bare", str(app_runs[0]["rows"]), env=env))
        save_runs.append(_run_child("saves", str(saves_copy), str(SAVES_IN_APP), env=env))
    rows = app_runs[0]["rows"]
    app_s = _med([r["start_to_paint_s"] for r in app_runs])
    bare_s = _med([r["start_to_paint_s"] for r in bare_runs])
    start_cpu = _med([r["cpu_to_paint_s"] for r in app_runs])
    start_cpu_bare = _med([r["cpu_to_paint_s"] for r in bare_runs])
    print(f"app start: {app_s:.2f} s, bare: {bare_s:.2f} s; CPU {start_cpu:.2f} s, bare "
          f"{start_cpu_bare:.2f} s", flush=True)  # fmt: skip
    saves_text = list_save_lines(save_runs, bare_runs)
    if args.only_app:
        print(app_only_text(app_runs, bare_runs) + "\n" + "\n".join(saves_text))
        shutil.rmtree(home, ignore_errors=True)
        return 0

    status_cmd = [sys.executable, "-m", "tui", "--db", str(path), "status", "--json"]
    code = (
        f"import sqlite3; c = sqlite3.connect({str(path)!r}); "
        f"print(len(c.execute({BASELINE_SQL!r}).fetchall()))"
    )
    query_cmd = [sys.executable, "-c", code]
    dump_cmd = [sys.executable, "-c", DUMP_CODE.format(path=str(path))]
    status_times, query_times, dump_times = [], [], []
    for _ in range(args.runs):  # in turns, as the app runs
        status_times.append(_time_cmd(status_cmd, env, 1))
        query_times.append(_time_cmd(query_cmd, env, 1))
        dump_times.append(_time_cmd(dump_cmd, env, 1))
    status_s, query_s, dump_s = _med(status_times), _med(query_times), _med(dump_times)
    python_s = _time_cmd([sys.executable, "-c", "pass"], env, args.runs)
    # what status --json loads, the way tui/launch.py loads it (the collector held)
    imports = "import gc; gc.disable(); import tui.cli.commands, store.views"
    imports_s = _time_cmd([sys.executable, "-c", imports], env, args.runs)
    print(f"status --json: {status_s:.3f} s, query: {query_s:.3f} s, python: {python_s:.3f} s, "
          f"kept rows as JSON: {dump_s:.3f} s", flush=True)  # fmt: skip

    export = export_year(path, env, args.runs, args.export_limit)
    print(f"export: {export}", flush=True)

    save_ms = saves(path, args.saves)
    print(f"saves: median {_med(save_ms):.0f} ms", flush=True)
    calls = store_calls(path)
    print(f"store calls: {calls}", flush=True)
    gc_hold = None if args.gc_runs == 0 else gc_figures(path, env, args.gc_runs)
    print(f"long reads with the collector held and not: {gc_hold}", flush=True)
    later = None if args.no_later else later_on(path, env, args.runs, roots)
    print(f"later on: {later}", flush=True)
    answers = same_answers(path, env, roots, export) if args.compare else []
    print("\n".join(answers), flush=True)

    def actions(runs: list[dict], key: str) -> tuple[list[float], list[float]]:
        pairs = [pair for r in runs for pair in r.get(key, [])]
        return [w for w, _ in pairs], [c for _, c in pairs]

    memory = max(r["max_rss_mb"] for r in app_runs)
    ratio_export = export["sumpbook_s"] / export["shell_s"] if export.get("shell_s") else None
    bare_wall, bare_cpu = actions(bare_runs, "scroll")
    figures = {
        "app": app_s / bare_s,
        "start_cpu": start_cpu,
        "start_cpu_bare": start_cpu_bare,
        "status": status_s / query_s,
        "export": ratio_export,
        "imported_s": _med([r["imported_s"] for r in app_runs]),
        "check_s": _med([r["check_s"] for r in app_runs]),
        "rows": rows,
        "calls": calls,
        "query_s": query_s,
        "python_s": python_s,
        "imports_s": imports_s,
        "status_s": status_s,
        "dump_s": dump_s,
        "export_s": export["sumpbook_s"],
        "export_rows": export.get("rows") or 0,
        "shell_s": export.get("shell_s"),
        "memory": memory,
        "facts": facts,
        "save_ms": save_ms,
        "export_write_s": export["in_process_s"],
        "cpu": {key: actions(app_runs, key)[1] for key in ("scroll", "sheet", "back")}
        | {
            "bare": bare_cpu,
            "bare_sheet": actions(bare_runs, "sheet")[1],
            "bare_back": actions(bare_runs, "back")[1],
        },
    }
    lines = [
        "# Speed on a plant-sized logbook",
        "",
        f"Book: {facts['units']} units, {facts['filters']} filter positions, "
        f"{facts['breathers']} breathers, {facts['entries']:,} entries ({facts['readings']:,} "
        f"readings, one per filter per shift) from {facts['first'][:10]} to "
        f"{facts['last'][:10]}; {facts['size_mb']:.0f} MB "
        f"(tests/benchmarks/make_big_logbook.py {facts['units']} {_years(facts)}).",
        f"Machine: {host['cpu']}, {host['memory']} RAM, {host['os']}; Python {host['python']}, "
        f"SQLite {host['sqlite']}, Textual {host['textual']} (a shared virtual machine: the "
        "absolute times move by a third between runs, the ratios less). Book file in the OS "
        f"cache; median of {args.runs} runs for each command, {args.app_runs} for the apps, "
        "taken in turns with their baselines; the export once.",
        "",
        "| figure | sumpbook | baseline | ratio | target |",
        "|---|---|---|---|---|",
        f"| app start → painted watch list ({rows} rows, {SIZE[0]}×{SIZE[1]}) | {app_s:.2f} s "
        f"| bare Textual DataTable app, same rows: {bare_s:.2f} s | {figures['app']:.2f} "
        "| ≤ 1.5 |",
        f"| `sumpbook status --json` | {status_s:.3f} s | `python -c` sqlite3, latest reading "
        f"of every filter: {query_s:.3f} s | {figures['status']:.2f} | ≤ 3 |",
    ]
    more = "> " if export["stopped"] else ""  # stopped at --export-limit
    rows_text = f"{export['rows']:,} rows" if export["rows"] is not None else "stopped"
    if ratio_export is not None:
        lines.append(
            f"| export one year as CSV ({rows_text}) | {more}{export['sumpbook_s']:.1f} s "
            f"| `sqlite3 -csv` shell, same rows ({export['shell_rows']:,}): "
            f"{export['shell_s']:.1f} s | {more}{ratio_export:.2f} | ≤ 2.5 |"
        )
    else:
        lines.append(
            f"| export one year as CSV ({rows_text}) | {more}{export['sumpbook_s']:.1f} s "
            "| sqlite3 shell not installed (apt-get install sqlite3): ratio skipped | – | ≤ 3 |"
        )
    lines += [
        f"| save one reading with its prediction update ({len(save_ms)} saves, commit "
        f"included) | median {_med(save_ms):.0f} ms, p99 {percentile(save_ms, 99):.0f} ms "
        "| | | |",
        f"| peak memory of the app (max RSS) | {memory:.0f} MB | bare app: "
        f"{max(r['max_rss_mb'] for r in bare_runs):.0f} MB | | < 250 MB |",
        f"| whole-file check, behind the painted list | {figures['check_s']:.1f} s | | | |",
        "",
        "Actions in the app, driven with Textual's Pilot (ms per key press), timed once the "
        "check behind the list has finished. CPU: the process's CPU time for the action, "
        "worker threads included (the work it costs). Wall: through Pilot's press and "
        "wait-until-idle, which adds its own waits: see the bare DataTable app's wall time "
        "for the same scroll keys.",
        "",
        "| action | CPU median / max | wall median / max | target |",
        "|---|---|---|---|",
    ]
    for key, label in (("scroll", "scroll the watch list (↓ ×12, PgDn ×6, End, Home)"),
                       ("sheet", "open a filter sheet (Enter on a filter row)"),
                       ("back", "back to the watch list (Esc)")):  # fmt: skip
        wall, cpu = actions(app_runs, key)
        lines.append(
            f"| {label}, {len(cpu)} times | {_med(cpu):.0f} / {max(cpu):.0f} | "
            f"{_med(wall):.0f} / {max(wall):.0f} | < 100 |"
        )
    lines.append(
        f"| bare DataTable app, the same scroll keys | {_med(bare_cpu):.0f} / {max(bare_cpu):.0f} "
        f"| {_med(bare_wall):.0f} / {max(bare_wall):.0f} | |"
    )
    for key, label in (("sheet", "bare app: open a screen with a filter sheet's widgets"),
                       ("back", "bare app: back from it (Esc)")):  # fmt: skip
        wall, cpu = actions(bare_runs, key)
        lines.append(
            f"| {label}, {len(cpu)} times | {_med(cpu):.0f} / {max(cpu):.0f} "
            f"| {_med(wall):.0f} / {max(wall):.0f} | |"
        )
    lines += [
        "",
        "Store calls behind those screens, each on a fresh read-only connection (as the app's "
        "worker threads open one), median, ms:",
        "",
        "| call | ms |",
        "|---|---|",
        f"| `views.watch(book)` (the watch list, from the caches) | {calls['watch']:.0f} |",
        f"| `sheets.filter_sheet(book, tag)` (status, curve, forecast and element history "
        f"from the element cache) | {calls['filter_sheet']:.0f} |",
        f"| one filter's status recomputed (`statuscache.live_status`) "
        f"| {calls['recompute']:.0f} |",
    ]
    lines += issue_table(figures, app_s, bare_s)
    lines.append(
        f"\nApp start, the process's CPU to the painted list (threads included; less moved "
        f"by the other work on the machine than the wall time): {start_cpu:.2f} s against the "
        f"bare app's {start_cpu_bare:.2f} s, {start_cpu / start_cpu_bare:.2f}×."
    )
    if gc_hold is not None:
        lines += gc_lines(gc_hold, args.gc_runs)
    if answers:
        lines += [
            "",
            "The same answers (`cmp` of the outputs, each code on its own fresh copy of the book):",
            "",
            "| book | output | size | code compared with this code | result |",
            "|---|---|---|---|---|",
            *answers,
        ]
    else:
        lines += ["", "No `--compare DIR`: the outputs were not compared with other code."]
    if later is not None:
        lines += later_lines(later, args.runs)
    lines += notes(figures)
    lines += saves_text
    lines += ["", f"Benchmark run time: {time.perf_counter() - began:.0f} s."]
    text = "\n".join(lines) + "\n"
    args.out.write_text(text, encoding="utf-8")
    print(text)
    shutil.rmtree(home, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
