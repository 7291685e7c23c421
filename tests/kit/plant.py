"""The small invented plants the tests use, built through the store API, and the app on
them: a tiny register (fill_register), the app tests' plant with a frozen clock
(build_plant), the laptop's prefs file, and driving the app (app_for, settle, register_row)."""

from __future__ import annotations

import asyncio
import json
import os
from datetime import UTC, datetime, timedelta
from pathlib import Path

from store import record
from store.base.session import from_environ
from store.db.book import Book, open_book
from store.ledger import journal, register
from store.ledger.entries import BreatherSwap, ElementChange, Reading, Sample, TopUp
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit

CLOCK = datetime(2026, 5, 13, 10, 0, tzinfo=UTC)  # the plant's frozen "now" (an early shift)
START = CLOCK - timedelta(days=140)


def build_plant(book: Book) -> None:
    """Invented history: three elements run out on P1-RF, a fourth on its way; a second unit
    whose return filter sits at its bypass setting; swaps, top-ups and a sample."""
    fill_register(book)
    register.add(
        book,
        Unit(
            tag="P2",
            name="Saw 2",
            area="Hall B",
            reservoir_l=250,
            fluid="HV46",
            normal_temp_c=45,
            coldest_start_c=12,
        ),
    )
    register.add(
        book,
        FilterPosition(
            tag="P2-RF",
            unit="P2",
            kind="return",
            element="RX-10",
            rating_um=10,
            bypass_bar=3.5,
            limit_bar=2.5,
            clean_bar=0.4,
            normal_flow_lpm=80,
        ),
    )
    t = START
    entries = [ElementChange(filter="P1-RF", reason="interval", at=t, by="CD")]  # first known
    for life_days in (30, 34, 38):  # earlier elements, each read every 3 days to the limit
        for day in range(0, life_days, 3):
            dp = 0.5 + 2.0 * (day / life_days) ** 2
            entries.append(
                Reading(
                    filter="P1-RF",
                    dp_bar=round(dp, 2),
                    temp_c=48,
                    at=t + timedelta(days=day),
                    by="AB",
                )
            )
        t += timedelta(days=life_days)
        entries.append(
            ElementChange(
                filter="P1-RF",
                reason="limit",
                condition="caked",
                batch=f"B{life_days}",
                at=t,
                by="CD",
            )
        )
    for day in range(1, 40, 3):  # the element in service now
        if t + timedelta(days=day) > CLOCK - timedelta(hours=2):
            break
        dp = 0.5 + 2.0 * (day / 36) ** 2
        entries.append(
            Reading(
                filter="P1-RF", dp_bar=round(dp, 2), temp_c=46, at=t + timedelta(days=day), by="AB"
            )
        )
    for day, state in ((10, "clean"), (40, "clean"), (80, "dirty")):
        entries.append(
            Reading(
                filter="P1-PF", indicator=state, temp_c=47, at=START + timedelta(days=day), by="CD"
            )
        )
    for day in (5, 35, 60):
        entries.append(
            Reading(
                filter="P2-RF",
                dp_bar=1.0 + day / 30,
                temp_c=44,
                at=CLOCK - timedelta(days=day),
                by="AB",
            )
        )
    entries.append(
        Reading(filter="P2-RF", dp_bar=3.6, temp_c=44, at=CLOCK - timedelta(days=1), by="AB")
    )
    entries.append(
        BreatherSwap(
            breather="P1-BR",
            reason="interval",
            condition="1/2 spent",
            at=START + timedelta(days=2),
            by="AB",
        )
    )
    entries.append(
        BreatherSwap(
            breather="P1-BR",
            reason="spent",
            condition="2/3 spent",
            at=START + timedelta(days=62),
            by="AB",
        )
    )
    for day in (20, 60, 100, 130):
        entries.append(
            TopUp(
                unit="P1",
                volume_l=8,
                fluid="HV46",
                filtered_um=3,
                at=START + timedelta(days=day),
                by="CD",
            )
        )
    entries.append(
        Sample(unit="P1", code="18/16/13", water_ppm=120, at=CLOCK - timedelta(days=9), by="AB")
    )
    entries.sort(key=lambda e: e.at)
    record.log_many(book, entries)
    book.set_setting("clock", CLOCK.strftime("%Y-%m-%dT%H:%M:%SZ"))
    book.set_setting("timezone", "UTC")


async def settle(pilot, screen_type=None, timeout: float = 10.0) -> None:
    """Wait until the top screen (of `screen_type`, if given) has shown its data: on the
    workers themselves (their completion, then a pause for what they handed to the UI loop),
    again while a worker or what it handed back started another (the list's catch-up, the
    check behind the first paint, a sheet's read once it is on top)."""
    from textual.worker import WorkerError  # a worker failed or cancelled: ended all the same

    app = pilot.app

    async def until_settled() -> None:
        while True:
            await pilot.pause()
            if app.workers:
                try:
                    await app.workers.wait_for_complete()
                except WorkerError:
                    pass  # what failed is shown by its screen; the tests look there
                continue
            screen = app.screen
            ok = screen_type is None or isinstance(screen, screen_type)
            if ok and getattr(screen, "loaded", True):
                return

    try:
        await asyncio.wait_for(until_settled(), timeout)
    except TimeoutError:
        raise AssertionError(f"{app.screen} did not settle") from None


async def register_row(pilot, tab: str, tag: str):
    """From the watch list to the register's `tab`, the cursor on `tag`; returns the screen."""
    from textual.widgets import DataTable

    from tui.screens.register import RegisterScreen

    await pilot.press("3")
    await settle(pilot, RegisterScreen)
    screen = pilot.app.screen
    screen.show_tab(tab)
    await pilot.pause()
    table = screen.query_one(f"#table-{tab}", DataTable)
    table.move_cursor(row=table.get_row_index(tag))
    await pilot.pause()
    return screen


def run_cli(capsys, *args: str) -> tuple[int, str, str]:
    """The command line run in this process: exit code, stdout, stderr."""
    from tui.cli import main  # the command line only for the tests that drive it

    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


_plant_files: dict[str, Path] = {}


def plant_file(folder: Path) -> Path:
    """`build_plant` written once per test process into `folder` (the first one asked with):
    tests that start many books from it copy the file."""
    if "path" not in _plant_files:
        path = folder / "plant.db"
        with open_book(path) as book:
            build_plant(book)
            book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        _plant_files["path"] = path
    return _plant_files["path"]


def entry_rows(path: Path) -> list[tuple]:
    """Every row of `entries` as stored, by id, read with plain sqlite3."""
    import sqlite3

    conn = sqlite3.connect(path)
    try:
        return conn.execute("SELECT * FROM entries ORDER BY id").fetchall()
    finally:
        conn.close()


def raw_entry_count(path: Path) -> int:
    """Rows in `entries`, read with plain sqlite3 (no checks, no migration: a damaged or
    refused file is counted as it is)."""
    import sqlite3

    conn = sqlite3.connect(path)
    try:
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    finally:
        conn.close()


def count_entries(path: Path, kind: str | None = None) -> int:
    with open_book(path, create=False) as book:
        return len(journal.read(book, kinds=[kind] if kind else None))


def fill_register(book: Book) -> None:
    """A tiny invented plant: one unit, two filters, one breather, two technicians."""
    register.add(book, Technician(tag="AB", name="A.B."))
    register.add(book, Technician(tag="CD"))
    # ISO VG 46 oil; ν40 and ν100 typical of a VI ~100 mineral oil (invented test fluid)
    register.add(
        book, Fluid(tag="HV46", name="test oil 46", iso_vg=46, nu40_cst=46.0, nu100_cst=6.8)
    )
    register.add(
        book,
        Unit(
            tag="P1",
            name="Press 1",
            area="Hall A",
            reservoir_l=400,
            fluid="HV46",
            normal_temp_c=50,
            coldest_start_c=10,
            target_code="17/15/12",
        ),
    )
    register.add(
        book,
        FilterPosition(
            tag="P1-RF",
            unit="P1",
            kind="return",
            element="RX-10",
            rating_um=10,
            bypass_bar=3.5,
            limit_bar=2.5,
            clean_bar=0.4,
            normal_flow_lpm=120,
        ),
    )
    register.add(
        book,
        FilterPosition(
            tag="P1-PF",
            unit="P1",
            kind="pressure",
            rating_um=3,
            bypass_bar=7.0,
            limit_bar=5.0,
            clean_bar=0.8,
            gauge=False,
        ),
    )
    register.add(book, Breather(tag="P1-BR", unit="P1", kind="desiccant", swap_interval_d=90))
    register.set_shifts(book, [("early", "06:00"), ("late", "14:00"), ("night", "22:00")])


def write_prefs(tmp_path: Path, **prefs: str) -> Path:
    """This laptop's preferences as a file: technician AB, bar, °C, L, dark, unless given."""
    path = tmp_path / "prefs.json"
    data = {"tech": "AB", "pressure": "bar", "temperature": "C", "volume": "L", "theme": "dark"}
    data.update(prefs)
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def app_for(path: Path, **options):
    """The app on the logbook at `path`, with the session the command line would read from
    the environment the test set up (clock, prefs file)."""
    from tui.app import SumpbookApp  # textual only where an app is made

    session = from_environ(os.environ)
    book = open_book(path, clock=session.clock)
    return SumpbookApp(book, cursor_blink=False, session=session, **options)


async def burst(pilot, *keys: str) -> None:
    """The keys sent in one go, as a fast typist, a scanner or a terminal's paste of keys
    sends them: all queued before the app takes the first (Pilot.press waits for the app to
    go idle after each key, which hides what happens to keys that arrive together)."""
    from textual import events

    app = pilot.app
    for key in keys:
        char = key if len(key) == 1 else None
        app.post_message(events.Key(key, char))
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()
