"""What a technician met on the demo and a new book (issue 24): alarm fatigue, readings nobody
made, words, forms after a refusal, keys."""

from __future__ import annotations

from textual.widgets import DataTable

from tests.kit.plant import settle
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
