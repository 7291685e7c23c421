"""Speed of sumpbook on a plant-sized logbook, each figure against a baseline run in the same go.

Usage:  python tests/benchmarks/speed.py PATH [--out FILE] [--saves N]
        (PATH: a book from tests/benchmarks/make_big_logbook.py, e.g. 200 units, 5 years)

Figures (median of several runs where it is cheap):
1. App start to a painted watch list, a fresh process each time, ÷ a bare Textual app that
   shows a DataTable of as many rows (target ≤ 1.5).
2. `sumpbook status --json` ÷ a `python -c` that opens the file with the sqlite3 module and
   runs one indexed query for the latest reading of every filter (target ≤ 3).
3. Export of the book's last year as CSV (`sumpbook export --from --to -o`) ÷ the sqlite3
   shell's own CSV export of the same rows (target ≤ 3). Needs Debian's `sqlite3` package
   (`apt-get install sqlite3`); without the shell this ratio is skipped, and said so.
4. Saving one reading, the prediction update included (journal.log on a copy of the book,
   with its commit): median and 99th percentile in ms.
5. Peak memory (max RSS) of the app process on the big book (target < 250 MB).
6. Scrolling the watch list and opening a filter sheet, driven with Textual's Pilot: ms per
   action (target < 100 ms).

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
SHEETS = 3  # filter sheets opened (in the first app run)
TARGETS = {"app": 1.5, "status": 3.0, "export": 3.0, "memory_mb": 250.0, "action_ms": 100.0}
# The what-if runs: store.book.open_book without its whole-file quick_check (header checks kept).
WHATIF_PATCH = (
    "import store.book as _b; _check = _b.check_header; "
    "_b.check_header = lambda conn, path, quick=True: _check(conn, path, quick=False)"
)
WHATIF_CLI = f"import sys; {WHATIF_PATCH}; from tui.cli import main; sys.exit(main(sys.argv[1:]))"
BASELINE_SQL = (
    "SELECT f.tag, (SELECT e.dp_bar FROM entries e WHERE e.filter = f.tag "
    "AND e.kind = 'reading' ORDER BY e.at_utc DESC LIMIT 1) FROM filters f"
)


# ---- run in a child process: the app, or the bare DataTable app ----------------------------------


async def _settle(pilot, done, timeout: float = 120.0) -> None:
    """Wait until `done()` holds and no worker is running, then for the screen to refresh."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        await pilot.pause()
        if done() and not pilot.app.workers._workers:
            await pilot.pause()
            return
        await asyncio.sleep(0.005)
    raise RuntimeError("the screen did not settle")


async def _timed(pilot, key: str, done) -> tuple[float, float]:
    """(wall ms through Pilot, CPU ms of the whole process, worker threads included)."""
    wall, cpu = time.perf_counter(), time.process_time()
    await pilot.press(key)
    await _settle(pilot, done)
    return 1000 * (time.perf_counter() - wall), 1000 * (time.process_time() - cpu)


async def _drive_app(path: Path, started: float, sheets_too: bool) -> dict:
    from store.book import open_book
    from tui.app import SumpbookApp
    from tui.screens.filter_sheet import FilterSheetScreen
    from tui.screens.watch import WatchScreen

    if os.environ.get("SPEED_WHATIF"):
        import store.book

        check = store.book.check_header
        store.book.check_header = lambda conn, path, quick=True: check(conn, path, quick=False)
    app = SumpbookApp(open_book(path, create=False), cursor_blink=False)
    out: dict = {}
    async with app.run_test(size=SIZE) as pilot:

        def watch_ready() -> bool:
            return isinstance(app.screen, WatchScreen) and app.screen.loaded

        await _settle(pilot, watch_ready)
        out["start_to_paint_s"] = time.time() - started
        table = app.screen.query_one("#watch-table")
        out["rows"] = table.row_count
        out["scroll"] = [await _timed(pilot, key, watch_ready) for key in SCROLL_KEYS]

        def sheet_ready() -> bool:
            return isinstance(app.screen, FilterSheetScreen) and app.screen.loaded

        sheets, back = [], []
        filter_rows = [i for i, r in enumerate(app.screen.shown) if r.what == "filter"]
        picked = filter_rows[:: max(len(filter_rows) // SHEETS, 1)][:SHEETS]
        for i in picked if sheets_too else []:
            app.screen.query_one("#watch-table").move_cursor(row=i)
            await _settle(pilot, watch_ready)
            sheets.append(await _timed(pilot, "enter", sheet_ready))
            back.append(await _timed(pilot, "escape", watch_ready))
        out["sheet"], out["back"] = sheets, back
    import resource

    out["max_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    app.book.close()
    return out


async def _drive_bare(rows: int, started: float) -> dict:
    from textual.app import App, ComposeResult
    from textual.widgets import DataTable, Footer, Header

    class Bare(App[None]):
        def compose(self) -> ComposeResult:
            yield Header()
            yield DataTable(id="t", cursor_type="row", zebra_stripes=True)
            yield Footer()

        def on_mount(self) -> None:
            table = self.query_one(DataTable)
            table.add_columns(*(f"column {i}" for i in range(COLUMNS)))
            rng = random.Random(1)
            for i in range(rows):
                table.add_row(f"U{i:03d}-RF", "12 Jun–14 Jun", f"{rng.random():.2f} bar",
                              "▁▂▃▅▆", "", f"U{i // 4:03d}", "return", "trend", "",
                              key=str(i))  # fmt: skip
            self.ready = True

    app = Bare()
    app.ready = False
    out: dict = {}
    async with app.run_test(size=SIZE) as pilot:
        await _settle(pilot, lambda: app.ready)
        out["start_to_paint_s"] = time.time() - started
        out["scroll"] = [await _timed(pilot, key, lambda: app.ready) for key in SCROLL_KEYS]
    import resource

    out["max_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def _child(argv: list[str]) -> int:
    started = float(os.environ["SPEED_STARTED"])
    if argv[0] in ("app", "app-start"):
        out = asyncio.run(_drive_app(Path(argv[1]), started, argv[0] == "app"))
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


def warm(path: Path) -> None:
    for suffix in ("", "-wal"):
        f = Path(str(path) + suffix)
        if f.exists():
            with f.open("rb") as fh:
                while fh.read(1 << 24):
                    pass


def saves(path: Path, count: int) -> list[float]:
    """ms per journal.log of a reading (validation, insert, status and unit refresh, commit)
    on a copy of the book, on filters picked at random, at the book's clock."""
    from store import journal
    from store.book import open_book
    from store.entries import Reading
    from store.register import FilterPosition, Technician, list_all

    with tempfile.TemporaryDirectory(dir=path.parent) as folder:
        copy = Path(folder) / "saves.db"
        for suffix in ("", "-wal"):
            if Path(str(path) + suffix).exists():
                shutil.copyfile(str(path) + suffix, str(copy) + suffix)
        times = []
        with open_book(copy, create=False) as book:
            journal.load_hooks()
            tech = list_all(book, Technician)[0].tag
            filters = [f for f in list_all(book, FilterPosition) if f.gauge]
            rng = random.Random(4)
            now = book.now()
            for i in range(count):
                pos = rng.choice(filters)
                reading = Reading(filter=pos.tag, dp_bar=round(rng.uniform(0.3, 0.9) * pos.limit_bar, 2),
                                  temp_c=50.0, by=tech, at=now - timedelta(minutes=count - i))  # fmt: skip
                t = time.perf_counter()
                journal.log(book, reading)
                times.append(1000 * (time.perf_counter() - t))
        return times


def store_calls(path: Path, repeat: int = 5) -> dict[str, float]:
    """ms of the store calls behind the screens, each on a fresh read-only connection (as the
    app's worker threads have), median of `repeat`."""
    import sqlite_utils

    from store import journal, sheets, status, statuscache
    from store.book import Book
    from store.conditions import contexts

    statuscache.preload()
    conn0 = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    tags = [t for (t,) in conn0.execute("SELECT tag FROM filters ORDER BY tag")]
    conn0.close()
    rng = random.Random(8)

    def fresh() -> Book:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, isolation_level=None)
        return Book(db=sqlite_utils.Database(conn), path=path, readonly=True)

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

    def recompute(book: Book) -> None:  # what a stale row costs (rows older than a day)
        nonlocal ctxs
        ctxs = ctxs or list(contexts(book).values())
        statuscache.live_status(book, rng.choice(ctxs))

    out = {
        "recompute": timed(recompute, 3 * repeat),
        "watch": timed(lambda b: status.watch(b)),
        "filter_sheet": timed(lambda b: sheets.filter_sheet(b, rng.choice(tags))),
        "filter_view": timed(lambda b: statuscache.filter_view(b, rng.choice(tags))),
    }
    book = fresh()
    end = book.now()
    t = time.perf_counter()
    year = journal.read(book, since=end - timedelta(days=365), until=end)
    out["read_year_s"] = time.perf_counter() - t
    out["read_year_rows"] = len(year)
    book.close()
    return out


def export_year(path: Path, env: dict[str, str], runs: int, limit_s: float) -> dict:
    from store.book import open_book
    from store.timeutil import format_utc, parse_time

    with open_book(path, create=False) as book:
        local, end = book.local_zone(), book.now()
        last = end.astimezone(local).date()
        start_text, end_text = f"{last.replace(year=last.year - 1)}T00:00", f"{last}T00:00"
        start_utc = format_utc(parse_time(start_text, local, now=end))
        end_utc = format_utc(parse_time(end_text, local, now=end))
    out: dict = {"from": start_text, "to": end_text}
    with tempfile.TemporaryDirectory() as folder:
        csv_path = Path(folder) / "year.csv"
        cmd = [sys.executable, "-m", "tui", "--db", str(path), "export", "--from", start_text,
               "--to", end_text, "-o", str(csv_path)]  # fmt: skip
        out["sumpbook_s"] = _time_cmd(cmd, env, 1, limit_s)  # minutes each: once
        out["stopped"] = out["sumpbook_s"] < 0
        out["sumpbook_s"] = abs(out["sumpbook_s"])
        out["rows"] = (
            sum(1 for _ in csv_path.open(encoding="utf-8")) - 1 if csv_path.exists() else None
        )
        shell = shutil.which("sqlite3")
        if shell is None:
            out["shell_s"] = None
            return out
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
        out["shell_s"] = _time_cmd(shell_cmd, env, runs)
        out["shell_rows"] = sum(1 for _ in shell_csv.open(encoding="utf-8")) - 1
    return out


def percentile(values: list[float], p: float) -> float:
    ordered = sorted(values)
    k = (len(ordered) - 1) * p / 100
    lo, hi = int(k), min(int(k) + 1, len(ordered) - 1)
    return ordered[lo] + (ordered[hi] - ordered[lo]) * (k - lo)


def notes(figures: dict, facts: dict, calls: dict, export: dict, app_s: float, app_w: float,
          bare_s: float, status_s: float, status_w: float, query_s: float, memory: float,
          scroll_cpu: list[float], bare_cpu: list[float], sheet_cpu: list[float],
          sheet_cpu_w: list[float], back_cpu_w: list[float],
          save_ms: list[float]) -> list[str]:  # fmt: skip
    """Which targets hold, and for those that do not, where the time goes (from this run)."""
    size = facts["size_mb"]
    check = app_s - app_w
    out = ["", "## Targets", ""]

    def verdict(ok: bool) -> str:
        return "holds" if ok else "MISSED"

    out.append(
        f"- App start ≤ 1.5 × bare: {verdict(figures['app'] <= TARGETS['app'])} "
        f"({figures['app']:.1f}×). {check:.1f} s of it is `PRAGMA quick_check` over the whole "
        f"{size:.0f} MB file, which store/book.py runs on every open, and the app opens the "
        f"book twice before the list shows (its own connection, then the watch list's worker "
        f"thread). Without that check {app_w / bare_s:.1f}×: the rest is importing scipy at "
        "start (store/fluid.py imports scipy.optimize at module level, about 0.35 s) and the "
        f"watch list read ({calls['watch']:.0f} ms for status.watch from the caches) and shown "
        "while Textual starts."
    )
    out.append(
        f"- `status --json` ≤ 3 × a bare query: {verdict(figures['status'] <= TARGETS['status'])}"
        f" ({figures['status']:.1f}×). The baseline is one query in a bare interpreter "
        f"({1000 * query_s:.0f} ms). The command pays the open check ({status_s - status_w:.1f}"
        f" s; without it {status_w / query_s:.0f}×), about 0.5 s of imports (scipy via "
        "store/fluid.py, rich, sqlite-utils), the watch list from the caches "
        f"({calls['watch']:.0f} ms) and the JSON (about 0.25 s, half of it json.dump with "
        "indent). 3× is not in reach of a Python command that loads the app's modules."
    )
    if figures["export"] is not None:
        read_s = calls["read_year_s"]
        out.append(
            f"- Export ≤ 3 × the sqlite3 shell: {verdict(figures['export'] <= TARGETS['export'])}"
            f" ({'more than ' if export['stopped'] else ''}{figures['export']:.0f}×). "
            f"Reading the year's entries takes {read_s:.1f} s "
            f"({1e6 * read_s / max(calls['read_year_rows'], 1):.1f} µs each, "
            f"{read_s / export['shell_s']:.1f}× the shell's whole export); the other "
            f"{'more than ' if export['stopped'] else ''}"
            f"{export['sumpbook_s'] - read_s:.0f} s are store/csvio.py's work per row: "
            "shift_at() for every entry (dateutil's datetime_exists on each shift start, about "
            "60 % of the time), iso_local() through dateutil, the unit keys worked out per "
            "row, a dict per row for DictWriter. Entries come in time order, so the shift can "
            "be kept while it holds; even so, 3× needs an export that reads plain rows, not "
            "entries: the read alone is more than the shell's whole export."
        )
    else:
        out.append("- Export: the sqlite3 shell is not installed, so this ratio was skipped.")
    out.append(f"- Peak memory < 250 MB: {verdict(memory < TARGETS['memory_mb'])} "
               f"({memory:.0f} MB).")  # fmt: skip
    scroll_ok = max(scroll_cpu) < TARGETS["action_ms"]
    out.append(
        f"- Scrolling < 100 ms per key: {verdict(scroll_ok)} (CPU median "
        f"{_med(scroll_cpu):.0f} ms, longest {max(scroll_cpu):.0f} ms; the bare DataTable app: "
        f"{_med(bare_cpu):.0f} ms, longest {max(bare_cpu):.0f} ms: the longest are End and "
        "PgDn, which redraw the whole table in both)."
    )
    out.append(
        f"- Opening a filter sheet < 100 ms: {verdict(max(sheet_cpu) < TARGETS['action_ms'])} "
        f"(median {_med(sheet_cpu):.0f} ms). The sheet's worker opens the book (the "
        f"{status_s - status_w:.1f} s check again); without it {_med(sheet_cpu_w):.0f} ms: "
        f"store/sheets.py's filter_sheet rereads the position's whole history for the element "
        f"table ({calls['filter_sheet']:.0f} ms; `statuscache.filter_view` gives the same "
        f"status and element summaries in {calls['filter_view']:.0f} ms, most of it the "
        "forecast), the first sheet of a run imports the fitting maths (numpy, scipy: the app "
        "can load them behind the first paint with `statuscache.preload`), and the sheet's "
        "chart and tables render. Returning to the list (Esc) "
        f"reloads it in full each time ({_med(back_cpu_w):.0f} ms without the check)."
    )
    out.append(
        f"- Saving a reading (no target): median {_med(save_ms):.0f} ms, p99 "
        f"{percentile(save_ms, 99):.0f} ms; most of it is the forecast (store/trend.py), the "
        "element history comes from the element cache."
    )
    out.append(
        f"- Not in the targets: a status row older than a day is recomputed before the list "
        f"shows ({calls['recompute']:.0f} ms each, about "
        f"{calls['recompute'] * facts['filters'] / 1000:.0f} s for all {facts['filters']} on the "
        "first start of a day). `status.watch(book, max_age=None)` shows the kept rows at once "
        "and `statuscache.refresh_stale(book)` can catch up in a worker."
    )
    return out


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
    parser.add_argument("--runs", type=int, default=3, help="runs of each process timed (3)")
    parser.add_argument("--app-runs", type=int, default=2, help="app runs, each way (2)")
    parser.add_argument(
        "--export-limit", type=float, default=150.0,
        help="stop the year's export after this many seconds and report it as more (150)",
    )  # fmt: skip
    parser.add_argument(
        "--build", nargs=2, type=float, metavar=("N_UNITS", "YEARS"),
        help="make the book first if PATH does not exist (e.g. --build 200 5)",
    )  # fmt: skip
    args = parser.parse_args(argv)
    path = args.path.resolve()
    began = time.perf_counter()
    if not path.exists():
        if not args.build:
            parser.error(f"{path} does not exist: give --build N_UNITS YEARS")
        from store.timeutil import parse_utc
        from tests.benchmarks.make_big_logbook import DEFAULT_END, build

        made = build(int(args.build[0]), args.build[1], path, 4406, parse_utc(DEFAULT_END))
        print(f"built {path} in {made['total_s']:.0f} s", flush=True)
    home = Path(tempfile.mkdtemp(prefix="speed-"))
    env = {**os.environ, "SUMPBOOK_CONFIG": str(home / "prefs.json"), "PYTHONPATH": str(ROOT),
           "TERM": "xterm-256color"}  # fmt: skip
    whatif = {**env, "SPEED_WHATIF": "1"}
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    tech = conn.execute("SELECT tag FROM technicians ORDER BY tag LIMIT 1").fetchone()[0]
    conn.close()
    (home / "prefs.json").write_text(json.dumps({"tech": tech}), encoding="utf-8")

    facts, host = book_facts(path), machine()
    print(f"book: {facts}\nmachine: {host}", flush=True)
    warm(path)

    # Sheets are opened in the first run of each kind; the others time the start and scrolling.
    app_runs = [_run_child("app" if i == 0 else "app-start", str(path), env=env)
                for i in range(args.app_runs)]  # fmt: skip
    app_what = [_run_child("app" if i == 0 else "app-start", str(path), env=whatif)
                for i in range(args.app_runs)]  # fmt: skip
    rows = app_runs[0]["rows"]
    bare_runs = [_run_child("bare", str(rows), env=env) for _ in range(args.app_runs)]
    app_s = _med([r["start_to_paint_s"] for r in app_runs])
    app_w = _med([r["start_to_paint_s"] for r in app_what])
    bare_s = _med([r["start_to_paint_s"] for r in bare_runs])
    print(f"app start: {app_s:.2f} s (what-if {app_w:.2f} s), bare: {bare_s:.2f} s", flush=True)

    status_cmd = ["status", "--json"]
    status_s = _time_cmd([sys.executable, "-m", "tui", "--db", str(path), *status_cmd], env,
                         args.runs)  # fmt: skip
    status_w = _time_cmd([sys.executable, "-c", WHATIF_CLI, "--db", str(path), *status_cmd],
                         env, args.runs)  # fmt: skip
    code = (
        f"import sqlite3; c = sqlite3.connect({str(path)!r}); "
        f"print(len(c.execute({BASELINE_SQL!r}).fetchall()))"
    )
    query_s = _time_cmd([sys.executable, "-c", code], env, args.runs)
    print(f"status --json: {status_s:.2f} s (what-if {status_w:.2f} s), query: {query_s:.3f} s",
          flush=True)  # fmt: skip

    export = export_year(path, env, args.runs, args.export_limit)
    print(f"export: {export}", flush=True)

    save_ms = saves(path, args.saves)
    print(f"saves: median {_med(save_ms):.0f} ms", flush=True)
    calls = store_calls(path)
    print(f"store calls: {calls}", flush=True)

    def actions(runs: list[dict], key: str) -> tuple[list[float], list[float]]:
        pairs = [pair for r in runs for pair in r[key]]
        return [w for w, _ in pairs], [c for _, c in pairs]

    memory = max(r["max_rss_mb"] for r in app_runs)
    ratio_export = export["sumpbook_s"] / export["shell_s"] if export.get("shell_s") else None
    figures = {"app": app_s / bare_s, "status": status_s / query_s, "export": ratio_export}
    lines = [
        "# Speed on a plant-sized logbook",
        "",
        f"Book: {facts['units']} units, {facts['filters']} filter positions, "
        f"{facts['breathers']} breathers, {facts['entries']:,} entries ({facts['readings']:,} "
        f"readings, one per filter per shift) from {facts['first'][:10]} to "
        f"{facts['last'][:10]}; {facts['size_mb']:.0f} MB "
        "(tests/benchmarks/make_big_logbook.py 200 5).",
        f"Machine: {host['cpu']}, {host['memory']} RAM, {host['os']}; Python {host['python']}, "
        f"SQLite {host['sqlite']}, Textual {host['textual']} (a shared virtual machine: the "
        "absolute times move by a third between runs, the ratios less). Book file in the OS "
        "cache; "
        f"median of {args.runs} runs for each command ({args.app_runs} for the app; the "
        "export once).",
        "",
        '"What-if" column: the same with the whole-file `PRAGMA quick_check` that '
        "`store.book.open_book` runs on every open left out (the check alone, nothing else "
        "changed), to show what that check costs.",
        "",
        "| figure | sumpbook | what-if | baseline | ratio (what-if) | target |",
        "|---|---|---|---|---|---|",
        f"| app start → painted watch list ({rows} rows, {SIZE[0]}×{SIZE[1]}) | {app_s:.2f} s "
        f"| {app_w:.2f} s | bare Textual DataTable app, same rows: {bare_s:.2f} s "
        f"| {figures['app']:.1f} ({app_w / bare_s:.1f}) | ≤ 1.5 |",
        f"| `sumpbook status --json` | {status_s:.2f} s | {status_w:.2f} s | `python -c` sqlite3, "
        f"latest reading of every filter: {query_s:.3f} s | {figures['status']:.1f} "
        f"({status_w / query_s:.1f}) | ≤ 3 |",
    ]
    more = "> " if export["stopped"] else ""  # stopped at --export-limit
    rows_text = f"{export['rows']:,} rows" if export["rows"] is not None else "stopped"
    if ratio_export is not None:
        lines.append(
            f"| export one year as CSV ({rows_text}) | {more}{export['sumpbook_s']:.1f} s "
            f"| | `sqlite3 -csv` shell, same rows ({export['shell_rows']:,}): "
            f"{export['shell_s']:.1f} s | {more}{ratio_export:.1f} | ≤ 3 |"
        )
    else:
        lines.append(
            f"| export one year as CSV ({rows_text}) | {more}{export['sumpbook_s']:.1f} s "
            "| | sqlite3 shell not installed (apt-get install sqlite3): ratio skipped | – | ≤ 3 |"
        )
    lines += [
        f"| save one reading with its prediction update ({len(save_ms)} saves, commit "
        f"included) | median {_med(save_ms):.0f} ms, p99 {percentile(save_ms, 99):.0f} ms "
        "| | | | |",
        f"| peak memory of the app (max RSS) | {memory:.0f} MB | | bare app: "
        f"{max(r['max_rss_mb'] for r in bare_runs):.0f} MB | | < 250 MB |",
        "",
        "Actions in the app, driven with Textual's Pilot (ms per key press). CPU: the process's "
        "CPU time for the action, worker threads included (the work it costs). Wall: through "
        "Pilot's press and wait-until-idle, which adds its own waits: the bare DataTable app "
        "takes the wall time shown for the same scroll keys.",
        "",
        "| action | CPU median / max | wall median / max | what-if CPU median / max | target |",
        "|---|---|---|---|---|",
    ]
    bare_wall, bare_cpu = actions(bare_runs, "scroll")
    for key, label in (("scroll", "scroll the watch list (↓ ×12, PgDn ×6, End, Home)"),
                       ("sheet", "open a filter sheet (Enter on a filter row)"),
                       ("back", "back to the watch list (Esc: the list reloads)")):  # fmt: skip
        wall, cpu = actions(app_runs, key)
        _, cpu_w = actions(app_what, key)
        lines.append(
            f"| {label}, {len(cpu)} times | {_med(cpu):.0f} / {max(cpu):.0f} | "
            f"{_med(wall):.0f} / {max(wall):.0f} | {_med(cpu_w):.0f} / {max(cpu_w):.0f} "
            f"| < 100 |"
        )
    lines.append(
        f"| bare DataTable app, the same scroll keys | {_med(bare_cpu):.0f} / {max(bare_cpu):.0f} "
        f"| {_med(bare_wall):.0f} / {max(bare_wall):.0f} | | |"
    )
    lines += [
        "",
        "Store calls behind those screens, each on a fresh read-only connection (as the app's "
        "worker threads open one), median of 5, ms:",
        "",
        "| call | ms |",
        "|---|---|",
        f"| `status.watch(book)` (the watch list, from the caches) | {calls['watch']:.0f} |",
        f"| `sheets.filter_sheet(book, tag)` as the sheet calls it now (rereads the position's "
        f"history for the element table) | {calls['filter_sheet']:.0f} |",
        f"| `statuscache.filter_view(book, tag)`: the same status and element summaries from "
        f"the element cache | {calls['filter_view']:.0f} |",
        f"| `journal.read` of the last year ({calls['read_year_rows']:,} entries; the export's "
        f"read) | {1000 * calls['read_year_s']:.0f} |",
        f"| one filter's status recomputed (`statuscache.live_status`: what each row older than "
        f"a day costs; all {facts['filters']} ≈ "
        f"{calls['recompute'] * facts['filters'] / 1000:.0f} s on one core) "
        f"| {calls['recompute']:.0f} |",
    ]
    lines += notes(figures, facts, calls, export, app_s, app_w, bare_s, status_s, status_w,
                   query_s, memory, actions(app_runs, "scroll")[1], bare_cpu,
                   actions(app_runs, "sheet")[1], actions(app_what, "sheet")[1],
                   actions(app_what, "back")[1], save_ms)  # fmt: skip
    lines += ["", f"Benchmark run time: {time.perf_counter() - began:.0f} s."]
    text = "\n".join(lines) + "\n"
    args.out.write_text(text, encoding="utf-8")
    print(text)
    shutil.rmtree(home, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
