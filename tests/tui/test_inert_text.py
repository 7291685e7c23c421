"""Stored text never reaches the terminal as control or escape characters, nor as markup.

The hostile text below holds what a crafted book could hold (typed on another laptop, merged,
edited by hand): an OSC window-title sequence ended by BEL, a CSI clear-screen (ECMA-48
8.3.6 / 8.3.39), the one-character CSI U+009B (ECMA-48 5.3, C1 set), DEL, a right-to-left
override (Unicode UAX #9, U+202E) and Textual/Rich markup. It is planted with SQL, past every
check of the doors, the way an old or crafted book would hold it.
"""

from __future__ import annotations

import json
import sqlite3
import unicodedata
import uuid
from datetime import timedelta

from hypothesis import given
from hypothesis import strategies as st

from store.base.text import inert, inert_line, json_inert
from store.base.timeutil import format_utc
from tests.kit.plant import CLOCK, app_for, settle
from tui.cli import main

HOSTILE = "\x1b]0;owned\x07\x1b[2J[bold]loud[/bold] \x9b31m\x7fX\u202eend"
# UAX #9, 2.1-2.2: the embedding, override and isolate controls
BIDI_CONTROLS = {*map(chr, range(0x202A, 0x202F)), *map(chr, range(0x2066, 0x206A))}
FORBIDDEN = ("\x1b", "\x07", "\x7f", "\u202e", *map(chr, range(0x80, 0xA0)))


def assert_inert(text: str) -> None:
    leaked = sorted({f"U+{ord(c):04X}" for c in text if c in FORBIDDEN})
    assert not leaked, leaked


# ---- the function ----------------------------------------------------------------------------------


@given(st.text())
def test_inert_leaves_no_control_character_but_the_line_break(text):
    shown = inert(text)
    assert len(shown) == len(text)  # one for one: styles of a rich Text stay in place
    assert all(c == "\n" or unicodedata.category(c) != "Cc" for c in shown)
    assert not any(c in BIDI_CONTROLS for c in shown)
    assert inert(shown) == shown
    assert "\n" not in inert_line(text)


def test_inert_shows_what_was_there():
    assert inert("plain ν 46 °C, µm") == "plain ν 46 °C, µm"
    assert inert("a\x1b[2Jb") == "a\u241b[2Jb"  # ␛, Unicode control pictures block
    assert inert("a\tb\nc\rd\x7f") == "a b\nc\u240dd\u2421"
    assert inert("\x9b31m") == "\ufffd31m"


def test_json_inert_is_the_same_json_value():
    data = {"name": HOSTILE}
    text = json_inert(json.dumps(data, ensure_ascii=False))
    assert_inert(text)
    assert json.loads(text) == data


def test_json_inert_rewrites_each_odd_character_alone():
    """Its quick search finds every character it rewrites, one at a time, in plain JSON."""
    for code in (0x7F, 0x80, 0x9B, 0x9F, 0x202A, 0x202E, 0x2066, 0x2069):
        text = json.dumps({"note": f"ok {chr(code)} ν 46 °C"}, ensure_ascii=False)
        assert json_inert(text) == text.replace(chr(code), f"\\u{code:04x}")
    plain = json.dumps({"note": "ν 46 °C, µm, ‒ \u2065 \u202f"}, ensure_ascii=False)
    assert json_inert(plain) == plain


# ---- the command line --------------------------------------------------------------------------


def plant_hostile_text(path) -> None:
    """Hostile text in a unit's name and area, a filter's element, a technician's name, a
    note and a breather swap's condition, written straight into the file."""
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA ignore_check_constraints = ON")  # a crafted book has no such checks
    with conn:
        conn.execute("UPDATE units SET name = ?, area = ? WHERE tag = 'P1'", [HOSTILE, HOSTILE])
        conn.execute("UPDATE filters SET element = ? WHERE tag = 'P1-RF'", [HOSTILE])
        conn.execute("UPDATE technicians SET name = ? WHERE tag = 'AB'", [HOSTILE])
        at = format_utc(CLOCK - timedelta(minutes=20))
        for kind, column, target, text in (
            ("note", "unit", "P1", HOSTILE),
            ("breather", "breather", "P1-BR", "fine"),
        ):
            conn.execute(
                f"INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, {column}, note, "
                "condition) VALUES (?, ?, ?, ?, 'AB', 'P1', ?, ?, ?)",
                [str(uuid.uuid4()), at, at, kind, target, text, HOSTILE],
            )
    conn.close()


def test_listings_and_status_print_stored_text_inert(plant, capsys):
    plant_hostile_text(plant)
    for args in (
        ["list", "units"],
        ["list", "filters"],
        ["list", "techs"],
        ["list", "entries"],
        ["status"],
        ["status", "--json"],
        ["log", "note", "a note", "--unit", "P1", "--by", "AB"],
    ):
        capsys.readouterr()
        code = main(["--db", str(plant), *args])
        out, err = capsys.readouterr()
        assert code == 0, (args, err)
        assert_inert(out + err)
        if args[0] == "list":
            assert "[bold]loud[/bold]" in out  # shown as written, not read as markup
        if args == ["status", "--json"]:
            json.loads(out)
    code = main(["--db", str(plant), "register", "unit", "P9", "--name", "x", "--fluid", HOSTILE])
    assert code == 2
    assert_inert(capsys.readouterr().err)


# ---- the app ------------------------------------------------------------------------------------


async def test_the_watch_list_and_the_shift_log_show_stored_text_inert(plant):
    from textual.widgets import DataTable, Static

    from tui.screens.shift_log import ShiftLogScreen
    from tui.screens.watch import WatchScreen

    plant_hostile_text(plant)
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        table = app.screen.query_one(DataTable)
        table.move_cursor(row=table.get_row_index("P1-BR"))  # its notes name the condition
        await pilot.pause()
        detail = str(app.screen.query_one("#detail", Static).render())
        assert "\u241b]0;owned" in detail
        assert_inert(app.export_screenshot())
        await pilot.press("2")
        await settle(pilot, ShiftLogScreen)
        rows = app.screen.query_one(DataTable)
        cells = [str(c) for i in range(rows.row_count) for c in rows.get_row_at(i)]
        # the note as written (not read as markup); at 80 columns its cell ends in '…'
        assert any("[bold]loud[/bold" in c for c in cells), cells
        for cell in cells:
            assert_inert(cell)
        assert_inert(str(app.screen.query_one("#handover", Static).render()))
        assert_inert(app.export_screenshot())


async def test_a_technician_named_like_markup_does_not_stop_the_sign_in(plant):
    # A name such as '[/]' read as markup stops Textual with a MarkupError.
    from textual.widgets import OptionList

    from tui.screens.sign_in import SignInScreen
    from tui.screens.watch import WatchScreen

    conn = sqlite3.connect(plant)
    conn.execute("PRAGMA ignore_check_constraints = ON")  # a crafted book has no such checks
    with conn:
        conn.execute("UPDATE technicians SET name = ? WHERE tag = 'CD'", ["[/] \x1b[2J"])
    conn.close()
    app = app_for(plant)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        app.action_sign_in()
        await pilot.pause()
        assert isinstance(app.screen, SignInScreen)
        options = app.screen.query_one(OptionList)
        prompts = [str(options.get_option_at_index(i).prompt) for i in range(options.option_count)]
        assert any("[/] \u241b[2J" in p for p in prompts)
        assert_inert(app.export_screenshot())


def test_the_apps_line_filter_takes_out_what_got_past_the_screens():
    from rich.segment import Segment
    from rich.style import Style
    from textual.color import Color

    from tui.widgets.inert import INERT_LINES

    bold = Style(bold=True)
    line = [Segment("ok "), Segment("\x1b]0;x\x07\x9b2J\u202e", bold), Segment("end")]
    out = INERT_LINES.apply(line, Color(0, 0, 0))
    assert "".join(s.text for s in out) == "ok ]0;x2Jend"
    assert out[1].style == bold
    plain = [Segment("nothing odd")]
    assert INERT_LINES.apply(plain, Color(0, 0, 0)) is plain


def test_an_export_to_the_terminal_is_inert_and_to_a_pipe_exact(plant, monkeypatch):
    import io

    plant_hostile_text(plant)

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True

    for out, exact in ((Terminal(), False), (io.StringIO(), True)):
        monkeypatch.setattr("sys.stdout", out)
        assert main(["--db", str(plant), "export", "--from", "2000-01-01"]) == 0
        text = out.getvalue()
        assert ("[bold]loud[/bold]" in text) and (HOSTILE in text) == exact
        if not exact:
            assert_inert(text)
