"""Shop-floor defects found on the demo at 80×24 (issue 23), each driven as a technician would."""

from __future__ import annotations

from textual.widgets import DataTable, Input, Select, Static

from store import views
from store.db.book import open_book
from store.sheets import tag_index
from tests.kit.plant import count_entries, settle
from tui.cli import main as cli_main
from tui.forms.confirm import ConfirmScreen
from tui.forms.reading import ReadingForm
from tui.forms.void import VoidForm
from tui.screens.shift_log import ShiftLogScreen
from tui.screens.tag_prompt import TagPrompt
from tui.screens.watch import WatchScreen


def shown(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


async def test_a_decimal_comma_with_three_digits_is_asked_about_not_guessed(demo_app):
    app = demo_app()
    before = count_entries(demo_app.path, "reading")
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"D2-R", "enter", *"1,250", "ctrl+s")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm)  # not saved: 1.25 bar or 1250?
        assert "1.25 or 1250?" in shown(form, "#m-dp")
        assert form.query_one("#f-dp", Input).value == "1,250"
        form.query_one("#f-dp", Input).value = "1.25"
        await pilot.press("ctrl+s")
        await settle(pilot, WatchScreen)
    assert count_entries(demo_app.path, "reading") == before + 1
    with open_book(demo_app.path, create=False) as book:
        d2r = next(f for f in views.watch(book).filters if f.filter == "D2-R")
        assert d2r.dp_bar == 1.25 and "dp-drop" in d2r.flags


async def test_v_in_the_shift_log_never_offers_a_colleagues_entry(demo_app):
    app = demo_app()  # signed in as AK
    before = count_entries(demo_app.path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        log = app.screen
        table = log.query_one(DataTable)
        entries = {e.id: e for e in log.shift.entries}
        ours = [e for e in entries.values() if e.by == "AK"]
        theirs = next(i for i, e in enumerate(log.shift.entries) if e.by != "AK")
        table.move_cursor(row=theirs)  # a colleague's row highlighted, as the top row was
        await pilot.pause()
        await pilot.press("v")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, VoidForm)
        offered = form.query_one("#f-entry", Input).value
        assert offered == (max(ours, key=lambda e: e.at).id[:8] if ours else "")
        # A colleague's entry typed on purpose: the form names it and whose it is, and asks.
        other = log.shift.entries[theirs]
        form.query_one("#f-entry", Input).value = other.id[:8]
        form.query_one("#f-reason", Input).value = "wrong tag"
        await pilot.press("ctrl+s")
        await pilot.pause()
        asked = app.screen
        assert isinstance(asked, ConfirmScreen)
        words = " ".join(str(w.render()) for w in asked.query(Static))
        assert other.id[:8] in words and f"logged by {other.by}, not by you" in words
        await pilot.press("n")
        await pilot.pause()
        assert app.screen is form
    assert count_entries(demo_app.path) == before  # nothing voided


async def test_v_offers_the_users_own_entry_and_asks_before_voiding_it(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.open_form("reading", "D2-P")
        await pilot.press(*"1.1", "ctrl+s")
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        mine = max((e for e in app.screen.shift.entries if e.by == "AK"), key=lambda e: e.at)
        await pilot.press("v")
        await pilot.pause()
        assert app.screen.query_one("#f-entry", Input).value == mine.id[:8]
        await pilot.press(*"typo", "enter")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        await pilot.press("y")
        await settle(pilot, ShiftLogScreen)
    with open_book(demo_app.path, create=False) as book:
        from store.ledger.journal import find_entry

        assert find_entry(book, mine.id).voided


async def test_a_temperature_nobody_typed_is_not_stored_as_measured(demo_app, capsys):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t", *"D2-R", "enter")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingForm)
        assert form.query_one("#f-temp", Input).value == ""  # no guess in the field
        assert "blank: not read (last 50 °C)" in shown(form, "#m-temp")
        await pilot.press(*"2.45", "ctrl+s")
        await settle(pilot, WatchScreen)
    with open_book(demo_app.path, create=False) as book:
        from store.ledger import journal

        saved = journal.read(book, kinds=["reading"])[-1]
        assert saved.filter == "D2-R" and saved.temp_c is None
    # the export says the normal temperature was assumed for it
    assert cli_main(["--db", str(demo_app.path), "export"]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if saved.id in line)
    assert "temp and flow assumed normal" in row


async def test_the_change_form_starts_where_letters_go_and_guesses_no_reason_far_below_limit(
    demo_app,
):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        with open_book(demo_app.path, create=False) as book:
            low = next(
                f
                for f in views.watch(book).filters
                if f.gauge and f.percent_of_limit is not None and f.percent_of_limit < 50
            )
        app.open_form("change", low.filter)
        await pilot.pause()
        form = app.screen
        assert form.focused is form.query_one("#f-condition", Input)
        await pilot.press(*"torn")  # no letter lost to the reason menu
        assert form.query_one("#f-condition", Input).value == "torn"
        assert form.query_one("#f-reason", Select).value is Select.NULL  # not "at change limit"
        await pilot.press("escape")
        await settle(pilot, WatchScreen)
        app.open_form("change", "D2-R")  # 89 % of its limit
        await pilot.pause()
        assert app.screen.query_one("#f-reason", Select).value == "limit"


async def test_the_tag_prompts_example_is_a_tag_of_this_book(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("t")
        await pilot.pause()
        prompt = app.screen
        assert isinstance(prompt, TagPrompt)
        example = prompt.query_one(Input).placeholder.removeprefix("e.g. ")
        with open_book(demo_app.path, create=False) as book:
            assert example in {h.tag for h in tag_index(book)}  # "P1-RF" is not in the demo
