"""One entry builder (store/ledger/entry_input.py) behind the forms and `sumpbook log`: the
same text in the same field gives the same answer at both doors, saved as the same stored
value or refused by both (issue 22: `--flow 12,5` was refused while `--dp 1,4` and the form
took a decimal comma)."""

from __future__ import annotations

import shutil

import pytest
from textual.widgets import Input, Select

from store.db.book import open_book
from store.ledger import journal
from tests.kit.plant import app_for, run_cli, settle
from tui.forms.base import EntryForm
from tui.forms.confirm import ConfirmScreen
from tui.screens.watch import WatchScreen

# Texts a person types: a decimal comma, a comma that reads two ways, a point, a word after
# the number, a minus. Values are chosen inside every field's range
# (store/base/validate.py RANGES) where they read as numbers, so a refusal is the reading's.
TEXTS = ["2,5", "2,500", "2.5", "2 x", "-1"]

# (kind, target, form field, CLI option, the entry attribute it lands in, other fields)
FIELDS = [
    ("reading", "P1-RF", "dp", "--dp", "dp_bar", {}),
    ("reading", "P1-RF", "temp", "--temp", "temp_c", {"dp": "1.1"}),
    ("reading", "P1-RF", "flow", "--flow", "flow_lpm", {"dp": "1.1"}),
    ("reading", "P1-RF", "hours", "--hours", "hours", {"dp": "1.1"}),
    ("topup", "P1", "volume", "--volume", "volume_l", {"how": "unfiltered"}),
    ("topup", "P1", "filtered", "--filtered", "filtered_um", {"volume": "2", "how": "filtered"}),
    ("sample", "P1", "water", "--water", "water_ppm", {}),
]
CLI_EXTRA = {"reading": ["--as-read"], "topup": [], "sample": []}
CLI_OTHER = {"dp": "--dp", "volume": "--volume"}


def newest(path, kind):
    with open_book(path, create=False) as book:
        found = journal.read(book, kinds=[kind], newest_first=True, limit=1)
    return found[0] if found else None


def cli_answer(capsys, path, kind, target, option, attr, others, text):
    argv = ["--db", str(path), "log", kind, target, f"{option}={text}", *CLI_EXTRA[kind]]
    for name, value in others.items():
        if name == "how":
            argv += ["--unfiltered"] if value == "unfiltered" else []
        else:
            argv += [f"{CLI_OTHER[name]}={value}"]
    before = newest(path, kind)
    code, _, err = run_cli(capsys, *argv)
    after = newest(path, kind)
    if code != 0:
        assert after == before, err  # refused: nothing written
        return "refused"
    return round(getattr(after, attr), 9)


async def form_answer(pilot, path, kind, target, field, attr, others, text):
    app = pilot.app
    app.open_form(kind, target)
    await pilot.pause()
    form = app.screen
    assert isinstance(form, EntryForm)
    for name, value in {**others, field: text}.items():
        control = form.query_one(f"#f-{name}")
        if isinstance(control, Select):
            control.value = value
        else:
            assert isinstance(control, Input)
            control.value = value
    await pilot.pause()
    before = newest(path, kind)
    await pilot.press("ctrl+s")
    await pilot.pause()
    if isinstance(app.screen, ConfirmScreen):  # a doubt asked about: saved as read
        await pilot.press("y")
    await app.workers.wait_for_complete()
    await pilot.pause()
    if app.screen is form:  # refused: say so, leave the form
        await pilot.press("escape")
        await pilot.pause()
        assert newest(path, kind) == before
        return "refused"
    after = newest(path, kind)
    assert after != before
    return round(getattr(after, attr), 9)


@pytest.mark.parametrize("kind,target,field,option,attr,others", FIELDS, ids=lambda v: str(v))
async def test_the_cli_and_the_form_answer_the_same_for_the_same_text(
    plant, tmp_path, capsys, kind, target, field, option, attr, others
):
    cli_book = tmp_path / "cli.db"
    shutil.copy(plant, cli_book)
    cli = {t: cli_answer(capsys, cli_book, kind, target, option, attr, others, t) for t in TEXTS}
    app = app_for(plant)
    form = {}
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, WatchScreen)
        for text in TEXTS:
            form[text] = await form_answer(pilot, plant, kind, target, field, attr, others, text)
    assert form == cli
    # the drift of issue 22 and the one reading of numbers (store.base.units.read_number):
    # a decimal comma is a point, a comma before three digits is asked about, not guessed
    assert cli["2,5"] == cli["2.5"] != "refused"
    assert cli["2,500"] == "refused" and cli["2 x"] == "refused"


async def test_the_round_reads_the_hour_meter_as_the_cli_does(demo_app, capsys):
    """The round read its hour meter by hand (a comma replaced by a point): '2,500' was
    saved as 2.5 h where `log reading --hours 2,500` asks which was meant."""
    from tui.screens.round_sheet import RoundScreen

    code, _, err = run_cli(
        capsys, "--db", str(demo_app.path), "log", "reading", "M1-R", "--dp", "1.1",
        "--hours", "2,500", "--as-read", "--by", "CT",
    )  # fmt: skip
    assert code == 2 and "2.5 or 2500?" in err
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot, WatchScreen)
        await pilot.press("4")
        await settle(pilot, RoundScreen)
        await pilot.press("ctrl+n")
        await settle(pilot, RoundScreen)
        screen = app.screen
        index = next(i for i, s in enumerate(screen.plan.stops) if "hour meter" in s.reads)
        stop = screen.plan.stops[index]
        screen.go_to(index)
        await pilot.pause()
        before = newest(demo_app.path, "reading")
        screen.query_one("#round-value", Input).value = "1.1"
        screen.query_one("#round-hours", Input).value = "2,500"
        await pilot.press("enter")
        await pilot.pause()
        assert "2.5 or 2500?" in str(screen.query_one("#round-msg").render())
        assert screen.query_one("#round-hours", Input).value == "2,500"  # put back
        assert screen.stop() == stop
    assert newest(demo_app.path, "reading") == before
