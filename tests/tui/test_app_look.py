"""What a technician reads at 80×24 on the demo plant: units as set, years where needed, one
name per thing, a help that lists every key once, and no label cut at the edge (issue 12).
The demo plant is frozen in time (27 Nov 2026), so every date below is fixed."""

from __future__ import annotations

import pytest
from rich.cells import cell_len
from textual.widgets import DataTable, Input, Label, Static

from store import record
from store.db.book import open_book
from store.health.status_model import FLAG_WORDS, URGENT_FLAGS
from store.ledger import journal
from store.ledger.entries import KINDS, TopUp, Void
from store.ledger.register import FilterPosition, list_all
from tests.kit.plant import app_for, settle, write_prefs
from tui.app import saved_text
from tui.base.keys import KEYS
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.help import HelpScreen
from tui.screens.unit_sheet import UnitSheetScreen
from tui.screens.watch import WatchScreen
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import RowTable

SIZE = (80, 24)


@pytest.fixture
def demo(demo_app):
    """The demo plant's app maker (tests/kit/plant.py), by a shorter name."""
    return demo_app


def screen_lines(app) -> list[str]:
    """The terminal as the technician sees it, one string per row."""
    return [strip.text for strip in app.screen._compositor.render_strips()]


def column(table: DataTable, key: str) -> list[str]:
    return [str(table.get_cell(row, key)) for row in table.rows]


def whole(text: str, lines: list[str]) -> bool:
    """`text` appears on one line of the screen, or over lines that wrap between its words."""
    flat = " ".join(line.strip() for line in lines)
    return text in flat


def region_text(app, widget) -> list[str]:
    """The rows of the screen inside `widget`, as shown."""
    r = widget.content_region
    return [line[r.x : r.right] for line in screen_lines(app)[r.y : r.bottom]]


# ---- units --------------------------------------------------------------------------------


async def test_psi_reaches_the_watch_header_and_its_values_fit(demo):
    app = demo(pressure="psi", temperature="F")
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(RowTable)
        assert str(table.columns["dp"].label) == "ΔP ref psi"
        text = "\n".join(screen_lines(app))
        assert "ΔP ref bar" not in text and " bar" not in text
        visible = column(table, "dp")[: table.region.height - 1]
        values = [v for v in visible if v and v != "–"]
        assert values and all(v.replace(".", "").isdigit() for v in values)  # the unit: header
        assert all(v in text for v in values)  # each number shown whole
        # the column is as wide as its widest cell or its header, no wider
        every = [v for v in column(table, "dp")]
        assert table.columns["dp"].width == max(len("ΔP ref psi"), *map(len, every))


async def test_the_flags_column_shrinks_after_a_void(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(RowTable)
        # PR-3, the widest flags (UNFILTERED, DIRTY OIL, WATER): cut at 80 columns, the line
        # under the list repeats them
        assert any(f.startswith("UNFILTERED, DIRTY OI") for f in column(table, "flags"))
        before = table.columns["flags"].width
        with open_book(demo.path, create=False) as book:
            unfiltered = [
                e
                for e in journal.read(book, unit="PR-3", kinds=["topup"])
                if isinstance(e, TopUp) and e.filtered_um is None and not e.voided
            ]
            for e in unfiltered:
                record.log(book, Void(voids=e.id, note="wrong cart", at=book.now(), by="AK"))
        app.book_changed()
        await pilot.press("f5")
        await settle(pilot, WatchScreen)
        flags = column(table, "flags")
        assert "DIRTY OIL, WATER" in flags and not any("UNFILTERED" in f for f in flags)
        assert table.columns["flags"].width == max(len(f) for f in flags) < before


async def test_the_filter_sheet_speaks_one_unit_set(demo):
    app = demo(pressure="psi", temperature="F")
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "D2-R", "DCC-2")  # a cold start opens its bypass
        await settle(pilot, FilterSheetScreen)
        sheet = app.screen
        parts = ("#reference", "#forecast", "#cold", "#notes")
        text = " ".join(str(sheet.query_one(p, Static).render()) for p in parts)
        assert "Cold start at" in text and "°F" in text and "psi" in text
        assert "°C" not in text and " bar" not in text  # no note left in the book's units


# ---- dates --------------------------------------------------------------------------------


async def test_days_in_another_year_show_the_year(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(RowTable)
        due = {str(k.value): str(table.get_cell(k, "due")) for k in table.rows}
        # the demo's today is 27 Nov 2026; D2-SS is due in May 2028, D2-R this week
        assert due["D2-SS"].startswith("16 May 2028")
        assert due["D2-R"].startswith("29 Nov ") and "2026" not in due["D2-R"]


# ---- one name per thing -------------------------------------------------------------------


async def test_kinds_read_as_the_book_and_the_csv_name_them(demo):
    app = demo()
    # wide enough for the kind column beside PR-3's three unit flags (UNFILTERED, DIRTY OIL,
    # WATER since issue 24)
    async with app.run_test(size=(140, 40)) as pilot:
        await settle(pilot, WatchScreen)
        kinds = set(column(app.screen.query_one(RowTable), "kind"))
        with open_book(demo.path, create=False) as book:
            registered = {f.kind for f in list_all(book, FilterPosition)}
        assert kinds - {"breather", "unit", ""} <= registered  # offline, suction-strainer as stored
        text = "\n".join(screen_lines(app))
        assert "off-line" not in text and " strainer" not in text
        await pilot.press("2")
        await pilot.pause()
        await settle(pilot)
        shift = app.screen.query_one("#shift-entries", DataTable)
        shown = {k.removesuffix(" VOIDED") for k in column(shift, "kind")}
        assert shown and shown <= set(KINDS)  # the CSV's kind column says the same


async def test_the_key_strip_names_each_key_as_the_help_does(demo):
    app = demo()
    async with app.run_test(size=(240, 40)) as pilot:  # room for every key of the screen
        await settle(pilot, WatchScreen)
        strip = app.screen.query_one(KeyStrip)
        line, items = screen_lines(app)[-1], strip.items
        await pilot.press("question_mark")
        await pilot.pause()
        help_lines = app.screen.plain().splitlines()
        for item in items:
            assert f"{item.key.shown} {item.key.word}" in line
            assert any(
                row.split()[:1] == [item.key.shown] and f" {item.key.word} " in row
                for row in help_lines
            ), item.key
        words = {i.key.word for i in items}
        assert {"shift log", "register", "recompute"} <= words
        assert not {"Shifts", "Plant", "Calc", "Cmds"} & words
        assert "^p" not in line and "ctrl+p" in line  # keys written as the help writes them


# ---- help ---------------------------------------------------------------------------------


async def test_help_lists_every_key_once_and_says_urgent_as_the_summary_counts(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        text = app.screen.plain(width=74)
        rows = [line.split(None, 2) for line in text.splitlines() if line.startswith("  ")]
        keyed = [(r[0], r[-1]) for r in rows if len(r) == 3]
        assert len(keyed) == len(set(keyed))  # each key with its meaning once
        assert sum(line.split()[:1] == ["ctrl+p"] for line in text.splitlines()) == 1
        firsts = {line.split()[0] for line in text.splitlines() if line.startswith("  ")}
        assert {"Enter", "x", "v", "[", "]", ".", "g", "ctrl+p", "ctrl+q"} <= firsts
        flat = " ".join(text.split("\nFlags")[1].split())
        words = list(FLAG_WORDS.items())
        for (flag, word), (_, after) in zip(words, [*words[1:], ("", "")], strict=True):
            row = flat[flat.index(f" {word} ") : flat.index(f" {after} ") if after else None]
            assert ("(urgent)" in row) == (flag in URGENT_FLAGS), word  # COLD START: not


async def test_help_lines_keep_their_column_when_they_wrap(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("question_mark")
        await pilot.pause()
        text = app.screen.plain(width=50)
        for line in text.splitlines():
            if line and not line.startswith(" "):
                assert line.startswith(("Keys ", "In forms", "Watch columns", "Flags")), line
        # a wrapped meaning goes on under its own column, past the key and the word
        long = KEYS["help"].meaning
        at = next(i for i, li in enumerate(text.splitlines()) if long.split()[0] in li)
        start = text.splitlines()[at].index(long.split()[0])
        following = text.splitlines()[at + 1]
        assert following[:start].strip() == "" and following[start:].strip()


# ---- wording ------------------------------------------------------------------------------


async def test_the_unit_sheet_says_each_thing_once(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "IMM-1", "IMM-1")
        await settle(pilot, UnitSheetScreen)
        fluid = str(app.screen.query_one("#unit-fluid", Static).render())
        assert fluid.count("ISO VG 46") == 1
        sample = str(app.screen.query_one("#unit-sample", Static).render())
        assert sample.lower().count("meets") <= 1 and "MEETS" not in sample
        assert "target 17/15/12" in sample


async def test_filter_sheet_wording(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("filter", "M1-R", "IMM-1")  # forecast from earlier lives (Weibull)
        await settle(pilot, FilterSheetScreen)
        forecast = str(app.screen.query_one("#forecast", Static).render())
        assert "Weibull" in forecast and "(model: weibull)" not in forecast
        with open_book(demo.path, create=False) as book:
            unread = [
                f.tag
                for f in list_all(book, FilterPosition)
                if not journal.read(book, filter=f.tag, kinds=["reading"])
            ]
        for tag in unread[:1]:
            await pilot.press("escape")
            await settle(pilot, WatchScreen)
            app.open_sheet("filter", tag, "")
            await settle(pilot, FilterSheetScreen)
            forecast = str(app.screen.query_one("#forecast", Static).render())
            assert "Now: –" not in forecast and "gauge –" not in forecast


def test_saved_words_for_a_void_and_a_note():
    from datetime import UTC, datetime

    at = datetime(2026, 11, 27, 12, tzinfo=UTC)
    void = Void(voids="c9f8ad9f" + "0" * 28, note="wrong tag", at=at, by="AK")
    assert saved_text(void).startswith("Voided entry c9f8ad9f")
    assert "the plant" not in saved_text(void)


def test_no_question_before_a_colon_in_the_step_up_advice():
    from store.forecast import anomaly

    # a steady rise, then one reading far above it (invented series, common practice)
    series = [(float(h), 0.5 + 0.002 * h) for h in range(0, 400, 24)] + [(408.0, 2.0)]
    step = anomaly.step_up(series)
    assert step is not None
    assert "?:" not in f"{step.reason}; {step.advice}" and "?" not in step.reason


# ---- 80×24: nothing cut -------------------------------------------------------------------


def cut_widgets(app) -> list[str]:
    """Every visible text widget whose text needs more room than it has (rows or columns),
    every entries table that would need to scroll sideways, and the key strip if its
    line runs past the edge."""
    problems = []
    screen = app.screen
    for w in screen.query(Static):
        if not w.display or not w.region.area or isinstance(w, Input):
            continue
        if w.styles.overflow_x == "hidden" and w.styles.text_wrap == "nowrap":
            continue
        size = w.content_region.size
        needed = w.get_content_height(size, app.size, size.width)
        if needed > size.height:
            problems.append(f"{type(w).__name__}#{w.id}: {needed} rows in {size.height}")
        if isinstance(w, Label) and cell_len(str(w.render()).split("\n")[0]) > size.width:
            problems.append(f"label {w.render()} wider than {size.width}")
    for t in screen.query(RowTable):
        if t.display and t.region.area and t.virtual_size.width > t.scrollable_content_region.width:
            problems.append(f"table #{t.id} {t.virtual_size.width} > {t.region.width}")
    for strip in screen.query(KeyStrip):
        line = screen_lines(app)[strip.region.y]
        for item in strip.items:
            if item.key.shown in strip.visible_keys():
                shown = f"{item.key.shown} {item.key.word}"
                if shown not in line:
                    problems.append(f"key strip cut: {shown}")
    return problems


async def walk(app, pilot, keys: tuple[str, ...], screen_type=None) -> list[str]:
    for key in keys:
        await pilot.press(key)
        await pilot.pause()
    await settle(pilot, screen_type)
    await pilot.pause()
    return [f"after {' '.join(keys)}: {p}" for p in cut_widgets(app)]


async def test_a_walk_through_every_screen_cuts_no_label(demo):
    app = demo()
    problems: list[str] = []
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        problems += await walk(app, pilot, (), WatchScreen)
        problems += await walk(app, pilot, ("enter",), FilterSheetScreen)
        problems += await walk(app, pilot, ("u",), UnitSheetScreen)
        problems += await walk(app, pilot, ("escape", "escape"), WatchScreen)
        for form in ("r", "c", "b", "o", "s", "n"):
            problems += await walk(app, pilot, (form,))
            problems += await walk(app, pilot, ("escape",), WatchScreen)
        problems += await walk(app, pilot, ("t",))
        problems += await walk(app, pilot, ("escape", "question_mark"), HelpScreen)
        problems += await walk(app, pilot, ("escape", "2"))
        problems += await walk(app, pilot, ("v",))
        problems += await walk(app, pilot, ("escape", "3"))
        for _tab in range(6):  # every tab of the register, and its edit form
            problems += await walk(app, pilot, ("e",))
            problems += await walk(app, pilot, ("escape", "right_square_bracket"))
        problems += await walk(app, pilot, ("escape", "4"))  # the round, this shift and next
        problems += await walk(app, pilot, ("ctrl+n",))
        problems += await walk(app, pilot, ("ctrl+o",))
        problems += await walk(app, pilot, ("escape", "1", "i"))
    print("\n".join(problems))
    assert problems == []


async def test_end_in_the_unit_sheets_entries_goes_to_the_last_row_not_sideways(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "IMM-1", "IMM-1")
        await settle(pilot, UnitSheetScreen)
        entries = app.screen.query_one("#unit-entries", RowTable)
        entries.focus()
        await pilot.press("end")
        await pilot.pause()
        assert entries.scroll_x == 0 and entries.cursor_row == entries.row_count - 1
        assert entries.shown_keys()[:5] == ["time", "kind", "target", "by", "id"]
        await pilot.press("home")
        assert entries.cursor_row == 0


async def test_the_unit_sheets_filter_header_lines_up_with_its_rows(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        app.open_sheet("unit", "IMM-1", "IMM-1")
        await settle(pilot, UnitSheetScreen)
        table = app.screen.query_one("#unit-filters", RowTable)
        lines = screen_lines(app)
        y = table.region.y
        header, first = lines[y], lines[y + 1]
        due = str(table.get_cell("M1-R", "due"))
        assert header.index("Due") == first.index(due)
        assert "SWAP DUE, SPENT" not in "".join(lines) or whole("SWAP DUE, SPENT", lines)


async def test_form_hints_and_messages_stay_whole(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("3")
        await settle(pilot)
        await pilot.press("e")  # the first unit's form
        await pilot.pause()
        code = app.screen.query_one("#f-target_code", Input)
        code.value = "17/15"
        await pilot.pause()
        message = str(app.screen.query_one("#m-target_code", Static).render())
        assert message.startswith("✗") and "e.g." in message
        shown = region_text(app, app.screen.query_one("#m-target_code", Static))
        assert whole(message, shown)  # the example too
        assert cut_widgets(app) == []
        await pilot.press("escape", "right_square_bracket", "e")  # a filter's form
        await pilot.pause()
        for hint in ("blank: no flow correction", "change the element at this ΔP"):
            assert whole(hint, screen_lines(app))


async def test_the_void_forms_id_does_not_run_into_its_hint(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await pilot.pause()
        await settle(pilot)
        await pilot.press("v")
        await pilot.pause()
        field = app.screen.query_one("#f-entry", Input)
        assert len(field.value) == 8 and cell_len(field.value) < field.content_region.width
        row = next(li for li in screen_lines(app) if "Entry id" in li)
        assert f"{field.value} " in row and "its first 6 or more characters" in row
        what = str(app.screen.query_one("#void-what", Static).render())
        assert what.startswith(field.value)


async def test_the_first_run_guide_keeps_its_lines(tmp_path, monkeypatch):
    from tui.screens.first_run import GUIDE, FirstRunScreen

    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="")))
    app = app_for(tmp_path / "empty.db")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, FirstRunScreen)
        lines = screen_lines(app)
        for line in GUIDE.splitlines():
            if line.strip():
                assert any(line.strip() in shown for shown in lines), line
        assert cut_widgets(app) == []


async def test_the_key_strip_is_one_line_in_groups_and_fits(demo):
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        strip = app.screen.query_one(KeyStrip)
        assert strip.region.height == 1
        line = screen_lines(app)[-1]
        assert cell_len(line.rstrip()) <= SIZE[0]
        heads = [g for g in (" log ", " look ", " book ") if g in line]
        assert len(heads) >= 2 and line.index(heads[0]) < line.index(heads[-1])
        hidden = len(strip.items) - len(strip.visible_keys())
        assert ("? help" in line) and (hidden == 0 or f"? help +{hidden}" in line)
        assert "Cmds" not in line and "^p" not in line
        # a click on a key presses it
        x = line.index("r read")
        await pilot.click(KeyStrip, offset=(x, 0))
        await pilot.pause()
        assert type(app.screen).__name__ == "ReadingForm"


async def test_keys_after_quit_open_nothing(demo):
    # typed fast ('question_mark' into a terminal): q quits, the u after it must not push
    # a sheet into the closing app (it showed a traceback)
    app = demo()
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        watch = app.screen
        app.backup_tried = True  # no backup file for this test
        app.exit = lambda *a, **k: None  # stay open to look: only the quitting state counts
        app.action_quit()
        app.open_sheet("unit", "IMM-1", "IMM-1")
        app.open_form("reading", "M1-R")
        await pilot.pause()
        assert app.screen is watch
