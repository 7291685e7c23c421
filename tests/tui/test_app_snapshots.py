"""SVG snapshots of the key screens on the demo plant at 80×24 (frozen clock, fixed prefs and
theme, no cursor blink), and the watch list at 120×40 in psi and °F. The README shows the
watch list and the filter sheet."""

from __future__ import annotations

from tests.kit.plant import app_for, settle, write_prefs
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.help import HelpScreen
from tui.screens.unit_sheet import UnitSheetScreen
from tui.screens.watch import WatchScreen

SIZE = (80, 24)


async def _loaded(pilot) -> None:
    await settle(pilot, WatchScreen)


def test_watch_list(snap_compare, demo_app):
    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=_loaded)


def test_filter_sheet(snap_compare, demo_app):
    async def open_sheet(pilot) -> None:
        await settle(pilot, WatchScreen)
        pilot.app.open_sheet("filter", "D2-R", "DCC-2")
        await settle(pilot, FilterSheetScreen)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_sheet)


def test_reading_form(snap_compare, demo_app):
    async def open_form(pilot) -> None:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"D2-R", "enter", *"2.5")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_form)


def test_watch_list_wide_in_psi_and_fahrenheit(snap_compare, demo_app):
    app = demo_app(pressure="psi", temperature="F")
    assert snap_compare(app, terminal_size=(120, 40), run_before=_loaded)


def test_unit_sheet(snap_compare, demo_app):
    async def open_sheet(pilot) -> None:
        await settle(pilot, WatchScreen)
        pilot.app.open_sheet("unit", "IMM-1", "IMM-1")
        await settle(pilot, UnitSheetScreen)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_sheet)


def test_shift_log(snap_compare, demo_app):
    async def open_log(pilot) -> None:
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await pilot.pause()
        await settle(pilot)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_log)


def test_register(snap_compare, demo_app):
    # the register as it is on this branch: its tables and tabs (no history pane here)
    async def open_register(pilot) -> None:
        await settle(pilot, WatchScreen)
        await pilot.press("3")
        await pilot.pause()
        await settle(pilot)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_register)


def test_help(snap_compare, demo_app):
    async def open_help(pilot) -> None:
        await settle(pilot, WatchScreen)
        await pilot.press("question_mark")
        await settle(pilot, HelpScreen)

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_help)


def test_first_run_guide(snap_compare, tmp_path, monkeypatch):
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    monkeypatch.setenv("SUMPBOOK_NOW", "2026-11-27T12:30:00Z")
    app = app_for(tmp_path / "new.db")

    async def shown(pilot) -> None:
        await pilot.pause()
        await settle(pilot)

    assert snap_compare(app, terminal_size=SIZE, run_before=shown)


def test_round(snap_compare, demo_app):
    # the next shift's round (the demo's clock stands near the end of one), a value typed in
    async def open_round(pilot) -> None:
        from tui.screens.round_sheet import RoundScreen

        await settle(pilot, WatchScreen)
        await pilot.press("4")
        await settle(pilot, RoundScreen)
        await pilot.press("ctrl+n")
        await settle(pilot, RoundScreen)
        await pilot.press(*"2.3")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=SIZE, run_before=open_round)
