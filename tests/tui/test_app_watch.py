"""The watch list driven from the keyboard at 80×24: order, filters, summary, routing, help,
command palette."""

from __future__ import annotations

from textual.widgets import DataTable, Input

from store import record, sheets, views
from store.db.book import open_book
from store.health import status_model
from store.sheets import watch_rows
from tests.kit import plant as kit
from tests.kit.plant import app_for, settle
from tui.screens.filter_sheet import FilterSheetScreen
from tui.screens.help import HelpScreen
from tui.screens.unit_sheet import UnitSheetScreen
from tui.screens.watch import WatchScreen


def tags_shown(app) -> list[str]:
    table = app.screen.query_one("#watch-table", DataTable)
    return [str(table.get_row_at(i)[0]) for i in range(table.row_count)]


async def test_opens_on_the_watch_list_most_urgent_first(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        tags = tags_shown(app)
        # every filter and breather of the register, and the unit with a flag (dirty sample)
        assert set(tags) == {"P1-RF", "P1-PF", "P2-RF", "P1-BR", "P1"}
        # P2-RF read 3.6 bar against a 3.5 bar bypass: unfiltered oil is passing, so it leads
        # (common practice, no source: a filter in bypass outranks one that is merely due)
        assert tags[0] == "P2-RF"
        table = app.screen.query_one(DataTable)

        def cell(column: str) -> str:
            return str(table.get_cell("P2-RF", column))

        # past its date and bypassing: the due cell says what to do now (issue 24)
        assert "AT BYPASS" in cell("flags") and cell("due") == "CHANGE NOW"
        # the cells show the store's numbers: reference ΔP in bar and its share of the limit
        with open_book(plant, create=False) as book:
            p2 = next(f for f in views.watch(book).filters if f.filter == "P2-RF")
        assert cell("limit").endswith(f"{100 * p2.dp_ref_bar / 2.5:3.0f}%")  # limit 2.5 bar
        assert cell("dp") == f"{p2.dp_ref_bar:.2f}"  # the unit is in the header
        assert str(table.columns["dp"].label) == "ΔP ref bar"


async def test_summary_line_counts_what_the_rows_say(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        screen = app.screen
        summary = str(screen.query_one("#summary").render())
        table = screen.query_one(DataTable)
        due_cells = [str(table.get_row_at(i)[1]) for i in range(table.row_count)]
        # an urgent line says INSPECT/CHANGE NOW in place of OVERDUE (issue 24)
        overdue = sum(
            "OVERDUE" in due or (due.endswith(" NOW") and row.overdue)
            for due, row in zip(due_cells, screen.shown, strict=True)
        )
        assert f"{overdue} overdue" in summary
        with open_book(plant, create=False) as book:
            urgent = sum(
                any(f in status_model.URGENT_FLAGS for f in x.flags)
                for x in views.watch(book).filters
            )
        assert f"{urgent} urgent" in summary


async def test_text_and_area_filters_narrow_the_list(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("slash", *"p2-")
        assert tags_shown(app) == ["P2-RF"]
        assert "1 of 5 shown" in str(app.screen.query_one("#summary").render())
        await pilot.press("escape")  # clears the text and returns to the table
        assert app.screen.query_one("#find", Input).value == ""
        assert app.focused is app.screen.query_one(DataTable)
        app.screen.query_one("#area").value = "area:Hall B"
        await pilot.pause()
        assert tags_shown(app) == ["P2-RF"]
        app.screen.query_one("#area").value = "unit:P1"
        await pilot.pause()
        assert set(tags_shown(app)) == {"P1-RF", "P1-PF", "P1-BR", "P1"}


async def test_enter_opens_the_sheet_and_escape_comes_back(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        tags = tags_shown(app)
        await pilot.press(*["down"] * tags.index("P1-RF"), "enter")
        await settle(pilot, FilterSheetScreen)
        assert app.screen.tag == "P1-RF"
        await pilot.press("u")
        await settle(pilot, UnitSheetScreen)
        assert app.screen.tag == "P1"
        await pilot.press("escape", "escape")
        await settle(pilot, WatchScreen)
        await pilot.press("2")
        await pilot.pause()
        assert app.current_mode == "shift"
        await pilot.press("1")
        await settle(pilot, WatchScreen)


async def test_help_lists_every_key_of_the_screen_and_the_app(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        text = app.screen.plain()
        for binding in [*WatchScreen.BINDINGS, *app.BINDINGS]:
            if binding.show and binding.description:
                assert (binding.tooltip or binding.description) in text
        await pilot.press("escape")
        await pilot.pause()
        assert isinstance(app.screen, WatchScreen)


async def test_palette_offers_every_action_and_every_tag(plant):
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        titles = {c.title for c in app.get_system_commands(app.screen)}
        for binding in [*WatchScreen.BINDINGS, *app.BINDINGS]:
            if binding.action not in ("quit", "quit_now", "command_palette"):
                assert (binding.tooltip or binding.description) in titles
        from tui.widgets.palette import BookCommands

        provider = BookCommands(app.screen)
        await provider.startup()
        texts = {text for text, _, _ in provider.commands()}
        assert {"Reading on P1-RF", "Breather swap on P1-BR", "Top-up on P2"} <= texts
        # choosing a command runs it: the reading form for that tag opens
        dict((t, c) for t, c, _ in provider.commands())["Reading on P2-RF"]()
        await pilot.pause()
        assert app.screen.query_one("#f-filter", Input).value == "P2-RF"


async def test_scales_up_to_a_big_terminal(plant):
    app = app_for(plant)
    async with app.run_test(size=(160, 50)) as pilot:
        await settle(pilot, WatchScreen)
        strip = app.screen.query_one("KeyStrip")
        assert strip.region.height == 1  # every key fits on one line at this width
        assert len(tags_shown(app)) == 5


async def test_a_damaged_file_is_named_behind_the_first_paint(plant):
    # Damage behind an intact header (tests/store/test_corrupt.py does the same to a bare book):
    # the whole-file check runs after the list is painted and says so, and nothing is written.
    from store.db.backup import rolling_backup
    from store.db.connection import forget_check
    from tests.kit.damage import noise, overwrite, root_page

    with open_book(plant, create=False) as book:
        rolling_backup(book.conn, book.path, "on-close")
    forget_check(plant)  # as a new process meets it
    offset, _ = root_page(plant, "entries")
    overwrite(plant, offset + 12, noise(40))
    before = plant.read_bytes()
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert app.book_checked
        messages = [n.message for n in app._notifications]
        assert any("damaged" in m and "sumpbook restore" in m for m in messages)
        assert not any("Traceback" in m for m in messages)
    app.book.close()
    assert plant.read_bytes() == before


async def test_the_list_is_read_again_only_when_the_book_may_show_something_else(plant):
    from store.ledger.entries import Note

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        watch, reads = app.screen, []
        read = watch.reload
        watch.reload = lambda: (reads.append(1), read())[-1]

        async def to_sheet_and_back() -> None:
            await pilot.press("enter")
            await settle(pilot, FilterSheetScreen)
            await pilot.press("escape")
            await settle(pilot, WatchScreen)

        await to_sheet_and_back()
        assert reads == []  # nothing changed: the list stays as it was shown
        with open_book(plant, create=False) as book:  # another program writes (the CLI)
            record.log(book, Note(unit="P1", note="hose checked", by="AB"))
        await to_sheet_and_back()
        assert reads == [1]
        app.book_changed()  # a change made in the app (a save, a register edit)
        await to_sheet_and_back()
        assert reads == [1, 1]


async def test_a_sheet_opened_again_shows_only_the_new_filter(plant):

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        tags = tags_shown(app)
        seen = []
        for tag in ("P1-RF", "P2-RF", "P1-RF"):
            app.screen.query_one(DataTable).move_cursor(row=tags.index(tag))
            await pilot.press("enter")
            await settle(pilot, FilterSheetScreen)
            sheet = app.screen
            seen.append(sheet)
            assert sheet.tag == tag and sheet.sheet.position.tag == tag
            assert str(sheet.query_one("#sheet-title").render()).startswith(f"FILTER {tag}")
            with open_book(plant, create=False) as book:
                rows = sheets.filter_sheet(book, tag).elements
            assert sheet.query_one("#elements", DataTable).row_count == len(rows)
            await pilot.press("escape")
            await settle(pilot, WatchScreen)
        assert seen[0] is seen[1] is seen[2]  # one screen kept, its content changed
        # Before the new filter is read, nothing of the one before is on show.
        kept = app.filter_sheet_for("P2-RF")
        assert kept is seen[0] and kept.sheet is None
        assert kept.query_one("#elements", DataTable).row_count == 0
        assert str(kept.query_one("#sheet-title").render()) == "FILTER P2-RF"
        assert str(kept.query_one("#forecast").render()) == "reading the book…"


async def test_after_a_weekend_the_kept_rows_show_as_they_are_now(plant, monkeypatch):
    # Three days without a save: the kept rows are not stale (what moves with the clock is
    # worked out as they are read), so the first paint is the list as computed now, with no
    # catch-up behind it and nothing written.
    from datetime import timedelta

    from store.base.timeutil import format_utc
    from store.derived import statuscache
    from tui.screens import watch as watch_module

    with open_book(plant, create=False) as book:  # the plant's clock, three days on
        book.set_setting("clock", format_utc(kit.CLOCK))  # kept at the plant's clock (the
        statuscache.refresh_stale(book)  # plant was logged at the machine's)
        book.set_setting("clock", format_utc(kit.CLOCK + timedelta(days=3)))
        kept = book.conn.execute("SELECT * FROM status_cache ORDER BY filter").fetchall()
    shown = []
    show = watch_module.WatchScreen.show_data

    def spy(screen, data):
        shown.append(data)
        show(screen, data)

    monkeypatch.setattr(watch_module.WatchScreen, "show_data", spy)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        assert "updating" not in str(app.screen.query_one("#summary").render())
    with open_book(plant, create=False) as book:
        assert statuscache.stale_filters(book) == []
        assert book.conn.execute("SELECT * FROM status_cache ORDER BY filter").fetchall() == kept
        audit = watch_rows(views.watch(book, as_of=book.now()))
    assert len(shown) == 1 and shown[0].stale == 0 and shown[0].rows == audit


async def test_the_key_strip_is_rebuilt_only_when_its_keys_change(plant):
    from tui.widgets.keystrip import KeyStrip

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        watch = app.screen
        before = watch.query_one(KeyStrip).items
        assert {"read", "unit", "find"} <= {i.key.word for i in before}
        await pilot.press("enter")
        await settle(pilot, FilterSheetScreen)
        assert "back" in {i.key.word for i in app.screen.query_one(KeyStrip).items}
        await pilot.press("escape")
        await settle(pilot, WatchScreen)
        assert watch.query_one(KeyStrip).items is before  # the very same keys: no repaint


def test_the_first_list_read_early_is_the_list(plant):
    # The app reads its first list in a thread while Textual starts; what comes back is what
    # reading it here gives, and a failure comes back as the book's own error.
    import pytest

    from store.base.errors import BookError
    from store.base.session import fixed_clock
    from store.base.timeutil import utc_now
    from tui.base import workers as common
    from tui.screens.watch import read_watch

    clock = fixed_clock(utc_now())  # both reads at the same moment
    early = common.read_early(plant, read_watch, clock).result(timeout=60)
    with open_book(plant, create=False, clock=clock) as book:
        here = read_watch(book)
    assert early == here and len(early.rows) == 5

    def refuse(book):
        raise BookError("the register is empty")

    with pytest.raises(BookError, match="the register is empty"):
        common.read_early(plant, refuse, clock).result(timeout=60)


async def test_a_kept_sheet_is_read_before_it_shows_or_shows_at_once_when_slow(plant, monkeypatch):
    import asyncio
    import time

    import tui.app as app_module

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        tags = tags_shown(app)
        table = app.screen.query_one(DataTable)
        table.move_cursor(row=tags.index("P1-RF"))
        await pilot.press("enter")  # the first opening makes the kept sheet
        await settle(pilot, FilterSheetScreen)
        kept, reloads = app.screen, []
        read = kept.reload
        kept.reload = lambda: (reloads.append(kept.tag), read())[-1]
        await pilot.press("escape")
        await settle(pilot, WatchScreen)
        table.move_cursor(row=tags.index("P2-RF"))
        await pilot.press("enter")
        await settle(pilot, FilterSheetScreen)
        assert app.screen is kept and kept.sheet.position.tag == "P2-RF"
        assert reloads == []  # read once, before it showed: no second read on showing
        await pilot.press("escape")
        await settle(pilot, WatchScreen)

        finished = []

        def slow(book, tag):  # a read slower than SHEET_WAIT_S
            time.sleep(4 * app_module.SHEET_WAIT_S)
            sheet = sheets_module.filter_sheet(book, tag)
            finished.append(sheet.position.tag)  # the stand-in did read the sheet
            return sheet

        from store import sheets as sheets_module

        monkeypatch.setattr(app_module, "filter_sheet", slow)
        table.move_cursor(row=tags.index("P1-RF"))
        await pilot.press("enter")
        await asyncio.sleep(2 * app_module.SHEET_WAIT_S)
        await pilot.pause()
        assert app.screen is kept and kept.tag == "P1-RF"  # shown before the read ended
        await asyncio.sleep(4 * app_module.SHEET_WAIT_S)  # the slow read ends: ignored
        await settle(pilot, FilterSheetScreen)
        assert kept.sheet.position.tag == "P1-RF" and reloads == ["P1-RF"]  # its own read
        assert finished == ["P1-RF"]  # the slow read ran to its end and was then ignored
        assert len(app.screen_stack) == 2  # shown once


async def test_a_kept_sheet_shows_the_newest_read_when_an_older_one_ends_last(plant, monkeypatch):
    # The kept sheet reads P1-RF again (shown again after a change to the book), the user goes
    # back and opens P2-RF, which is read and shown; only then does the P1-RF read end: it
    # must not overwrite the sheet. The order is forced with events, not with time.
    import asyncio
    import threading

    import tui.screens.filter_sheet as sheet_module

    held_threads: list[threading.Thread] = []
    started, release, delivered = threading.Event(), threading.Event(), threading.Event()

    def held(book, tag):
        if tag == "P1-RF":
            held_threads.append(threading.current_thread())
            started.set()
            release.wait(timeout=30)
        return sheets.filter_sheet(book, tag)

    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        tags, table = tags_shown(app), app.screen.query_one(DataTable)
        table.move_cursor(row=tags.index("P1-RF"))
        await pilot.press("enter")
        await settle(pilot, FilterSheetScreen)
        kept = app.screen
        monkeypatch.setattr(sheet_module, "filter_sheet", held)
        to_loop = app.call_from_thread

        def traced(callback, *args, **kwargs):  # tells when the held thread handed back
            try:
                return to_loop(callback, *args, **kwargs)
            finally:
                if threading.current_thread() in held_threads:
                    delivered.set()

        monkeypatch.setattr(app, "call_from_thread", traced)
        app.book_changed()  # as after a save from this sheet: shown again, it reads again
        await pilot.press("u")
        await settle(pilot, UnitSheetScreen)
        await pilot.press("escape")  # the kept sheet is back: its read of P1-RF is held
        assert await asyncio.to_thread(started.wait, 30) and app.screen is kept
        await pilot.press("escape")
        assert isinstance(app.screen, WatchScreen)
        table.move_cursor(row=tags.index("P2-RF"))
        await pilot.press("enter")
        opening = [w for w in app.workers if w.group == "sheet-read"]
        if opening:  # the read of P2-RF (not held), if it has not ended yet
            await app.workers.wait_for_complete(opening)
        await pilot.pause()
        assert app.screen is kept and kept.sheet.position.tag == "P2-RF"  # the newest read
        release.set()  # the older read ends now
        await asyncio.to_thread(delivered.wait, 5)  # its result handed back (or not at all)
        await settle(pilot, FilterSheetScreen)
        assert kept.tag == "P2-RF" and kept.sheet.position.tag == "P2-RF"
        title = kept.query_one("#sheet-title")
        assert "P2-RF" in str(title.render()) and "P1-RF" not in str(title.render())


async def test_a_catch_up_read_before_a_newer_list_is_not_shown_after_it(plant, monkeypatch):
    # The list's catch-up (kept rows brought up to date behind it) reads the list; F5 reads
    # it anew meanwhile and shows it; only then does the catch-up end: the older list must
    # not replace the newer one. The order is forced with events, not with time.
    import asyncio
    import threading
    from dataclasses import replace

    import tui.screens.watch as watch_module

    caught_up = watch_module.catch_up
    started, release, calls = threading.Event(), threading.Event(), []

    def held(book):
        data = caught_up(book)
        calls.append(1)
        if len(calls) > 1:
            return data  # a later catch-up ends at once
        started.set()
        release.wait(timeout=30)
        return replace(data, as_of_text="older")

    read = views.watch  # every list has a row to keep: the catch-up runs behind each

    monkeypatch.setattr(
        views, "watch", lambda *a, **k: replace(read(*a, **k), recomputed=("P1-RF",))
    )
    monkeypatch.setattr(watch_module, "catch_up", held)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        assert await asyncio.to_thread(started.wait, 30)  # the first catch-up is held
        watch = app.screen
        await pilot.press("f5")  # a newer list, read and shown while the catch-up waits
        reading = [w for w in app.workers if w.group == "watch"]
        if reading:  # the F5 read, if it has not ended yet (never the held catch-up)
            await app.workers.wait_for_complete(reading)
        await pilot.pause()
        assert watch.data is not None and watch.data.as_of_text != "older"
        release.set()
        await settle(pilot, WatchScreen)
        assert watch.data is not None and watch.data.as_of_text != "older"
