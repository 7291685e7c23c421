"""Sheets, shift log, register, sign-in, first run and closing, driven from the keyboard."""

from __future__ import annotations

import json

import pytest
from textual.widgets import DataTable, Input, Sparkline, Static

from store import views
from store.db.book import open_book
from store.exchange.demo import discard, is_throwaway
from store.ledger import register
from store.ledger.register import FilterPosition, Technician
from tests.kit import plant as kit
from tests.kit.plant import app_for, count_entries, settle, write_prefs
from tui.cli import main as cli_main
from tui.forms.confirm import ConfirmScreen
from tui.forms.register_record import RegisterForm
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.first_run import FirstRunScreen
from tui.screens.register import RegisterScreen
from tui.screens.shift_log import ShiftLogScreen
from tui.screens.sign_in import SignInScreen
from tui.screens.unit_sheet import UnitSheetScreen
from tui.screens.watch import WatchScreen
from tui.widgets.banner import DEMO_TEXT
from tui.widgets.plot import FilterPlot


def text_of(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


async def test_filter_sheet_shows_reference_forecast_cold_start_and_history(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "P1-RF", "P1")
        await settle(pilot, FilterSheetScreen)
        screen = app.screen
        assert "Ref ν" in text_of(screen, "#reference") and "mm²/s" in text_of(screen, "#reference")
        assert "2.50/3.50/0.40 bar" in text_of(screen, "#reference")
        assert "Cold start at 10 °C" in text_of(screen, "#cold")
        forecast = text_of(screen, "#forecast")
        assert "Change due" in forecast and "Basis:" in forecast
        life = text_of(screen, "#life")
        assert "3 reached the limit, 0 taken out early" in life  # all came out at the limit
        table = screen.query_one("#elements", DataTable)
        # the one in service, three that ran to the limit, the one fitted before the book began
        assert table.row_count == 5
        assert str(table.get_row_at(0)[1]) == "in service"
        assert [str(table.get_row_at(i)[3]) for i in (1, 2, 3, 4)] == ["limit"] * 3 + ["interval"]
        assert str(table.get_row_at(4)[0]) == "before book"
        # the newest earlier element lasted 38 days (912 h) in the invented history
        assert str(table.get_row_at(1)[2]) == "38 d (912 h)"
        # the chart drew the readings, the limit and bypass lines and the fitted curve
        plot = screen.query_one(FilterPlot)
        assert plot.sheet is not None and plot.sheet.status.forecast is not None
        drawn = plot.plt.build()
        assert "┄" in drawn and "═" in drawn and "◆" in drawn


async def test_unit_sheet_shows_fluid_sample_topups_and_temperatures(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "P1", "P1")
        await settle(pilot, UnitSheetScreen)
        screen = app.screen
        assert "ISO VG 46" in text_of(screen, "#unit-fluid")
        # ISO 4406 (REFERENCES.md §1b): 18/16/13 is one scale step over 17/15/12 at each size
        sample = text_of(screen, "#unit-sample")
        assert "DIRTIER than target" in sample and "17/15/12" in sample
        assert "24.0 L in the last 12 weeks" in text_of(screen, "#unit-topups")  # 3 × 8 L
        assert sum(screen.query_one("#topup-spark", Sparkline).data) == pytest.approx(24.0)
        assert "46 °C" in text_of(screen, "#unit-temps")
        filters = screen.query_one("#unit-filters", DataTable)
        assert {str(filters.get_row_at(i)[0]) for i in range(filters.row_count)} == {
            "P1-RF",
            "P1-PF",
        }
        # Enter on a filter row opens its sheet; c from there logs on that filter
        screen.query_one("#unit-filters").focus()
        await pilot.press("enter")
        await settle(pilot, FilterSheetScreen)
        await pilot.press("escape")
        await settle(pilot, UnitSheetScreen)
        await pilot.press("o")
        await pilot.pause()
        assert app.screen.query_one("#f-unit", Input).value == "P1"


async def test_shift_log_void_and_export_match_the_command_line(plant, tmp_path):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("reading", "P1-RF")
        await pilot.press(*"1.5", "enter")
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        screen = app.screen
        assert "2026-05-13/early" in text_of(screen, "#sheet-title")
        table = screen.query_one(DataTable)
        assert table.row_count == 1
        assert "1 × reading" in text_of(screen, "#handover")
        assert "P2-RF" in text_of(screen, "#handover")  # its flags are open
        await pilot.press("v")
        await pilot.pause()
        await pilot.press(*"typo", "enter")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)  # what will be voided, asked first
        await pilot.press("y")
        await settle(pilot, ShiftLogScreen)
        kinds = [str(table.get_row_at(i)[1]) for i in range(table.row_count)]
        assert "reading VOIDED" in kinds and "void" in kinds
        assert "strike" in str(table.get_row_at(kinds.index("reading VOIDED"))[1].style)
        # export: the prompt offers a name from the date and shift; we give our own path
        await pilot.press("x")
        await pilot.pause()
        prompt = app.screen.query_one("#file-input", Input)
        assert prompt.value.endswith("shiftlog-2026-05-13-early.csv")
        prompt.value = str(tmp_path / "app.csv")
        await pilot.press("enter")
        await settle(pilot, ShiftLogScreen)
        await pilot.press("left_square_bracket")
        await settle(pilot, ShiftLogScreen)
        assert "2026-05-12/night" in text_of(app.screen, "#sheet-title")
        await pilot.press("g", *"2026-05-01/late", "enter")
        await settle(pilot, ShiftLogScreen)
        assert "2026-05-01/late" in text_of(app.screen, "#sheet-title")
    code = cli_main(
        [
            "--db",
            str(plant),
            "export",
            "--shift",
            "2026-05-13/early",
            "-o",
            str(tmp_path / "cli.csv"),
        ]
    )
    assert code == 0
    assert (tmp_path / "app.csv").read_bytes() == (tmp_path / "cli.csv").read_bytes()
    lines = (tmp_path / "app.csv").read_text(encoding="utf-8").splitlines()
    entries = [line for line in lines if line.split(",")[3] != "status"]
    assert len(entries) == 3  # header + 2
    # the handover the screen showed follows as status rows (P2-RF's flags are open)
    assert "P2-RF" in [line.split(",")[4] for line in lines if line.split(",")[3] == "status"]


async def test_register_add_edit_and_refuse(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("3")
        await settle(pilot, RegisterScreen)
        screen = app.screen
        assert screen.query_one("#table-units", DataTable).row_count == 2
        # add a technician from the Techs tab
        screen.show_tab("techs")
        await pilot.press("a")
        await pilot.pause()
        assert isinstance(app.screen, RegisterForm)
        await pilot.press(*"ef", "tab", *"E. F.", "ctrl+s")
        await settle(pilot, RegisterScreen)
        # edit a filter's change limit: typed in bar, recorded old -> new with who
        screen.show_tab("filters")
        table = screen.query_one("#table-filters", DataTable)
        table.move_cursor(row=table.get_row_index("P1-RF"))
        await pilot.press("e")
        await pilot.pause()
        form = app.screen
        form.query_one("#f-limit_bar", Input).value = "2.4"
        await pilot.press("ctrl+s")
        await settle(pilot, RegisterScreen)
        # a limit above the bypass setting is refused by the book, in the form
        await pilot.press("e")
        await pilot.pause()
        form = app.screen
        form.query_one("#f-limit_bar", Input).value = "3.6"
        await pilot.press("ctrl+s")
        assert app.screen is form
        assert "below the bypass" in text_of(form, "#form-msg")
        assert app.focused is form.query_one("#f-limit_bar")  # the field at fault
        await pilot.press("escape")
    with open_book(plant, create=False) as book:
        assert register.get(book, Technician, "EF").name == "E. F."
        assert register.get(book, FilterPosition, "P1-RF").limit_bar == pytest.approx(2.4)
        log = [r for r in register.register_history(book, "P1-RF") if r["field"] == "limit_bar"]
        assert [(r["old"], r["new"], r["by"]) for r in log] == [("2.5", "2.4", "AB")]


async def test_a_clean_dp_near_the_bypass_is_asked_about_before_it_is_saved(plant):
    # issue 12: a clean ΔP close to the limit was saved silently. Sizing rule: a clean element
    # at most 1/2 of the bypass setting (The Handbook of Hydraulic Filtration, p. 29)
    from tui.forms.confirm import ConfirmScreen

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await kit.register_row(pilot, "filters", "P1-RF")
        await pilot.press("e")
        await pilot.pause()
        form = app.screen
        with open_book(plant, create=False) as book:
            before = register.get(book, FilterPosition, "P1-RF")
        assert before.bypass_bar and 0.5 * before.bypass_bar < 2.0 < before.limit_bar
        form.query_one("#f-clean_bar", Input).value = "2.0"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        assert "more than half the bypass setting" in str(app.screen.caution)
        await pilot.press("n")  # back to the form: nothing written
        await pilot.pause()
        assert app.screen is form
        with open_book(plant, create=False) as book:
            assert register.get(book, FilterPosition, "P1-RF").clean_bar == before.clean_bar
        await pilot.press("ctrl+s")
        await pilot.pause()
        await pilot.press("y")
        await settle(pilot, RegisterScreen)
    with open_book(plant, create=False) as book:
        assert register.get(book, FilterPosition, "P1-RF").clean_bar == pytest.approx(2.0)


def test_the_command_line_says_when_a_clean_dp_looks_mistyped(plant, capsys):
    # the same sizing rule (handbook, p. 29): saved, as it can be true, but not silently
    code = cli_main(["--db", str(plant), "register", "change", "filter", "P1-RF", "clean=2.0"])
    out = capsys.readouterr().out
    assert code == 0 and "CHECK:" in out and "more than half the bypass setting" in out
    code = cli_main(["--db", str(plant), "register", "change", "filter", "P1-RF", "clean=0.4"])
    assert code == 0 and "CHECK:" not in capsys.readouterr().out


async def test_preferences_change_units_and_theme(plant, tmp_path):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("3")
        await settle(pilot, RegisterScreen)
        screen = app.screen
        screen.show_tab("prefs")
        screen.query_one("#pref-pressure").value = "psi"
        screen.query_one("#pref-theme").value = "contrast"
        await pilot.pause()
        assert app.theme == "sumpbook-contrast"
        await pilot.press("1")
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(DataTable)
        with open_book(plant, create=False) as book:
            p2 = next(f for f in views.watch(book).filters if f.filter == "P2-RF")
        # NIST SP 811 App. B.8: 1 psi = 6894.757293168361 Pa exactly
        assert (
            str(table.get_cell("P2-RF", "dp")) == f"{p2.dp_ref_bar * 1e5 / 6894.757293168361:.1f}"
        )
        assert str(table.columns["dp"].label) == "ΔP ref psi"  # the header says the unit
    saved = json.loads((tmp_path / "prefs.json").read_text(encoding="utf-8"))
    assert saved["pressure"] == "psi" and saved["theme"] == "contrast"


async def test_sign_in_at_start_is_remembered(plant, tmp_path, monkeypatch):
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, SignInScreen)
        await pilot.press("down", "enter")  # AB, CD in the list: pick CD
        await pilot.pause()
        assert app.tech == "CD"
        assert "by CD" in app.sub_title
    assert json.loads((tmp_path / "prefs.json").read_text(encoding="utf-8"))["tech"] == "CD"


async def test_sign_in_by_typing_the_initials(plant, tmp_path, monkeypatch):
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, SignInScreen)
        await pilot.press("c", "enter")  # AB, CD in the list: typing C jumps to CD
        await pilot.pause()
        assert app.tech == "CD"


async def test_initials_nobody_has_sign_in_nobody(plant, tmp_path, monkeypatch):
    """Typed initials that match no technician leave no one highlighted: Enter signs in
    nobody (it signed in whoever was highlighted), the screen says why and stays."""
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        await pilot.press("z", "q", "enter")  # AB, CD in the list: nobody's begin ZQ
        await pilot.pause()
        assert isinstance(app.screen, SignInScreen)
        assert app.tech == ""
        said = str(app.screen.query_one("#sign-msg").render())
        assert "No technician's initials begin ZQ" in said
        await pilot.press("down", "enter")  # the list still works: the first one, AB
        await pilot.pause()
        assert app.tech == "AB"


async def test_first_run_on_an_empty_logbook(tmp_path):
    with open_book(tmp_path / "empty.db"):
        pass
    app = app_for(tmp_path / "empty.db")
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, FirstRunScreen)
        await pilot.press("g")
        await pilot.pause()
        assert isinstance(app.screen, SignInScreen)  # nobody registered: add yourself
        await pilot.press(*"JK", "space", *"Jan", "enter")
        await settle(pilot, RegisterScreen)
        assert app.tech == "JK"
    with open_book(tmp_path / "empty.db", create=False) as book:
        assert register.get(book, Technician, "JK").name == "Jan"


async def test_quit_makes_a_backup_and_a_failure_only_warns(plant, monkeypatch):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("q")
        await pilot.pause()
    backups = list((plant.parent / "plant-backups").glob("plant-*-on-close.db"))
    assert len(backups) == 1

    def broken(*args, **kwargs):
        raise OSError("disk full")

    monkeypatch.setattr("tui.app.rolling_backup", broken)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("q")
        await pilot.pause()
        assert app.is_running  # warned, still open
        assert any("Backup on close failed" in n.message for n in app._notifications)
        await pilot.press("q")
        await pilot.pause()
    assert not app.is_running


async def test_demo_is_said_plainly(plant):
    from tui.app import SumpbookApp as App

    app = App(open_book(plant), demo=True, cursor_blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        banner = app.screen.query_one("DemoBanner")
        assert banner.display and str(banner.render()) == DEMO_TEXT
        assert "sumpbook --db" in DEMO_TEXT and "demo plant" in app.sub_title
    assert count_entries(plant) > 0


async def test_first_run_can_open_the_demo_plant(tmp_path):
    with open_book(tmp_path / "empty.db"):
        pass
    app = app_for(tmp_path / "empty.db")
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, FirstRunScreen)
        await pilot.press("d")
        await pilot.pause()
        await app.workers.wait_for_complete()  # the demo is written in a worker thread
        await pilot.pause()
        assert isinstance(app.screen, (SignInScreen, WatchScreen))
        assert app.demo and is_throwaway(app.book.path)  # a fresh copy, nothing kept
        await pilot.press("escape")  # not signing in yet
        await settle(pilot, WatchScreen)
        assert app.screen.query_one("DemoBanner").display
        assert app.screen.query_one(DataTable).row_count > 10
    app.book.close()
    discard(app.book.path)
    assert (tmp_path / "empty.db").exists()  # the user's own empty logbook is left as it was
