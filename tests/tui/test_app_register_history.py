"""The register screen shows the highlighted record's history: who, when, field, old -> new."""

from __future__ import annotations

from textual.widgets import DataTable, Input, Static

from store import record
from store.db.book import open_book
from store.ledger import register
from store.ledger.register import FilterPosition
from tests.kit import plant as kit
from tests.kit.plant import app_for, settle
from tui.screens.register import RegisterScreen
from tui.screens.watch import WatchScreen


def history_text(screen) -> str:
    return str(screen.query_one("#reg-history", Static).render())


async def test_the_register_shows_each_records_history(plant):
    with open_book(plant, create=False) as book:  # a change made elsewhere, by CD
        register.update(book, FilterPosition, "P2-RF", {"clean_bar": 0.5}, by="CD")
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        screen = await kit.register_row(pilot, "filters", "P1-RF")
        assert "P1-RF history" in history_text(screen)
        assert "(new record)  added" in history_text(screen)
        await pilot.press("e")
        await pilot.pause()
        app.screen.query_one("#f-limit_bar", Input).value = "2.4"
        await pilot.press("ctrl+s")
        await settle(pilot, RegisterScreen)
        shown = history_text(screen)
        assert "AB   limit_bar  2.5 → 2.4" in shown and "2026-05-13 10:00" in shown
        table = screen.query_one("#table-filters", DataTable)
        table.move_cursor(row=table.get_row_index("P2-RF"))  # the pane follows the cursor
        await pilot.pause()
        shown = history_text(screen)
        assert "P2-RF history" in shown and "CD   clean_bar  0.4 → 0.5" in shown
        assert "limit_bar" not in shown
        screen.show_tab("shifts")
        await pilot.pause()
        assert "shift pattern" in history_text(screen)


async def test_the_unit_sheet_shows_a_notes_text_shortened(plant):
    from store.ledger.entries import Note
    from tui.screens.unit_sheet import UnitSheetScreen

    text = "hose at the clamp cylinder weeps at the lower fitting, tighten next stop"
    with open_book(plant, create=False) as book:
        record.log(book, Note(unit="P1", note=text, by="CD"))
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "P1", "P1")
        await settle(pilot, UnitSheetScreen)
        entries = app.screen.query_one("#unit-entries", DataTable)
        labels = [str(c.label) for c in entries.columns.values()]
        row = [str(cell) for cell in entries.get_row_at(0)]  # newest first
        kind, what = row[labels.index("Kind")], row[labels.index("What")]
        assert kind == "note" and what.startswith("hose at the clamp")
        assert what.endswith("…") and len(what) <= 30  # no wider than other kinds' lines
