"""What a technician met on the demo and a new book (issue 24): alarm fatigue, readings nobody
made, words, forms after a refusal, keys."""

from __future__ import annotations

from textual.widgets import DataTable, Input, Static

from tests.kit.plant import count_entries, settle
from tui.forms.confirm import ConfirmScreen
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.shift_log import ShiftLogScreen
from tui.screens.unit_sheet import UnitSheetScreen
from tui.screens.watch import WatchScreen


def row_texts(screen) -> dict[str, list[str]]:
    table = screen.query_one(DataTable)
    out = {}
    for i in range(table.row_count):
        cells = [str(c) for c in table.get_row_at(i)]
        out[cells[0]] = cells
    return out


async def test_a_dp_drop_says_inspect_now_and_cold_start_is_a_quiet_caution(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        screen = app.screen
        rows = row_texts(screen)
        assert rows["M1-R"][1] == "INSPECT NOW"  # ΔP DROP: no date in the due cell
        tags = list(rows)
        assert tags[0] == "M1-R"
        # "cold start" is a caution: lower case, and below every line that carries a task
        cold = [t for t, cells in rows.items() if "cold start" in cells[4]]
        assert cold and all("COLD START" not in cells[4] for cells in rows.values())
        screen.query_one(DataTable).move_cursor(row=0)
        await pilot.pause()
        detail = " ".join(str(w.render()) for w in screen.query("#detail"))
        assert "INSPECT NOW" in detail and "change due" not in detail


async def test_the_form_asks_about_a_reading_nobody_made(demo_app):
    app = demo_app()
    before = count_entries(demo_app.path, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        # D2-R's bypass is set to 3.5 bar (demo): 24 bar is a slipped decimal point
        await pilot.press("t", *"D2-R", "enter", *"24", "ctrl+s")
        await pilot.pause()
        asked = app.screen
        assert isinstance(asked, ConfirmScreen)
        words = " ".join(str(w.render()) for w in asked.query(Static))
        assert "7 times the bypass setting" in words and "(2.40 bar)?" in words
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        form.query_one("#f-dp", Input).value = "2.4"
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
        assert count_entries(demo_app.path, "reading") == before + 1
        # the same filter again in the same minute: asked, not saved without a word
        await pilot.press("t", *"D2-R", "enter", *"2.45", "ctrl+s")
        await pilot.pause()
        asked = app.screen
        assert isinstance(asked, ConfirmScreen)
        words = " ".join(str(w.render()) for w in asked.query(Static))
        assert "a reading in this minute already (ΔP 2.40 bar by AK)" in words
        await pilot.press("n", "escape")
        await settle(pilot, WatchScreen)
    assert count_entries(demo_app.path, "reading") == before + 1


async def test_an_hour_meter_elements_age_is_hours_run_with_the_calendar_days_beside(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "M1-P", "IMM-1")  # IMM-1 has an hour meter (demo)
        await settle(pilot, FilterSheetScreen)
        sheet = app.screen.sheet
        assert sheet.uses_hours
        text = " ".join(str(w.render()) for w in app.screen.query("#forecast"))
        run_h = sheet.status.element_age_h
        days = (sheet.as_of - sheet.status.changed_at).total_seconds() / 86400
        assert f"element age {run_h:.0f} h run (fitted {days:.0f} d ago)" in text
        assert f"{run_h / 24:.0f} d ({run_h:.0f} h)" not in text  # hours run ÷ 24 is no age


async def test_a_form_after_a_refusal_keeps_what_was_typed_and_clears_the_message_when_fixed(
    demo_app,
):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("change", "D2-R")
        await pilot.pause()
        form = app.screen
        await pilot.press(*"caked", "tab", *"B42")
        form.query_one("#f-time", Input).value = "2099-01-01 07:00"  # too far ahead
        form.query_one("#ack").value = True
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert app.screen is form
        msg = form.query_one("#form-msg", Static)
        assert "Not saved" in str(msg.render())
        time = form.query_one("#f-time", Input)
        assert app.focused is time
        await pilot.press("Q")  # a key typed now lands after the text, not over it
        assert time.value == "2099-01-01 07:00Q"
        await pilot.press("backspace", "backspace", "5")
        assert time.value == "2099-01-01 07:05"
        values = {i.id: i.value for i in form.query(Input)}
        assert values["f-filter"] == "D2-R" and values["f-condition"] == "caked"
        assert values["f-batch"] == "B42"
        time.value = "2026-11-27 13:00"
        await pilot.pause()
        assert str(msg.render()) == ""  # fixed: the refusal is gone


async def test_1_from_the_shift_log_goes_to_the_watch_list_not_a_sheet_left_open(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "DCC-2", "DCC-2")
        await settle(pilot, UnitSheetScreen)
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        await pilot.press("1")
        await settle(pilot)
        assert isinstance(app.screen, WatchScreen)


async def test_the_palette_names_keys_as_the_help_does_and_holds_only_our_commands(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        commands = {c.title: c.help for c in app.get_system_commands(app.screen)}
    assert commands["Find by text"] == "key /"
    assert commands["Help: every key and what the words on screen mean"] == "key ?"
    assert not [h for h in commands.values() if "slash" in h or "question_mark" in h]
    for leftover in ("Keys", "Maximize", "Screenshot", "Theme"):  # the framework's own
        assert leftover not in commands
    assert "Quit (makes a backup)" in commands


async def test_the_register_follows_the_first_run_guides_order(tmp_path, monkeypatch):
    # issue 24: the guide says yourself, the fluids, the units; the register opened on units
    from store.db.book import open_book
    from tests.kit.plant import app_for, write_prefs
    from tui.screens.first_run import ORDER
    from tui.screens.register import RegisterScreen

    assert ORDER.index("yourself") < ORDER.index("fluids") < ORDER.index("units")
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    with open_book(tmp_path / "empty.db"):
        pass
    app = app_for(tmp_path / "empty.db")
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        await pilot.press("g")
        await pilot.pause()
        await pilot.press(*"JK", "enter")  # yourself, on the sign-in screen
        await settle(pilot, RegisterScreen)
        await pilot.pause()
        assert app.screen.active() == "fluids"  # the next step, not the units tab


async def test_a_back_dated_change_logged_this_shift_is_in_its_handover(demo_app):
    from datetime import timedelta

    from store import record
    from store.db.book import open_book
    from store.ledger.entries import ElementChange

    with open_book(demo_app.path, create=False) as book:
        yesterday = book.now() - timedelta(days=1)
        record.log(
            book,
            ElementChange(filter="D2-K", reason="damage", condition="torn", by="AK", at=yesterday),
        )
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        handover = str(app.screen.query_one("#handover", Static).render())
    assert "Logged this shift, dated earlier:" in handover
    line = next(li for li in handover.splitlines() if li.strip().startswith("D2-K:"))
    assert "element changed" in line and "by AK" in line
