"""One entry builder (store/ledger/entry_input.py) behind the forms and `sumpbook log`: the
same text in the same field gives the same answer at both doors, saved as the same stored
value or refused by both (issue 22: `--flow 12,5` was refused while `--dp 1,4` and the form
took a decimal comma)."""

from __future__ import annotations

import pytest
from textual.widgets import Input, Select

from store import record
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


@pytest.fixture
def checked_only(monkeypatch):
    """Both doors save through `record.save`; here it checks the entry as a save does
    (`journal.validate`: ranges, tags, needs) and keeps it in a list instead of writing it, so
    that a dozen saves do not fit a dozen forecasts. Returns the list."""
    kept = []

    def save(book, entry):
        entry = journal.validate(book, entry, book.now())
        kept.append(entry)
        return record.Logged(entry, None)

    monkeypatch.setattr(record, "save", save)
    return kept


def cli_answer(capsys, kept, path, kind, target, option, attr, others, text):
    argv = ["--db", str(path), "log", kind, target, f"{option}={text}", *CLI_EXTRA[kind]]
    for name, value in others.items():
        if name == "how":
            argv += ["--unfiltered"] if value == "unfiltered" else []
        else:
            argv += [f"{CLI_OTHER[name]}={value}"]
    before = len(kept)
    code, _, err = run_cli(capsys, *argv)
    if code != 0:
        assert len(kept) == before, err  # refused: nothing saved
        return "refused"
    return round(getattr(kept[-1], attr), 9)


async def form_answer(pilot, kept, kind, target, field, attr, others, text):
    app = pilot.app
    app.open_form(kind, target)
    await pilot.pause()
    form = app.screen
    assert isinstance(form, EntryForm)
    for name, value in {**others, field: text}.items():
        control = form.query_one(f"#f-{name}")
        assert isinstance(control, Input | Select)
        control.value = value
    await pilot.pause()
    before = len(kept)
    await pilot.press("ctrl+s")
    await pilot.pause()
    if isinstance(app.screen, ConfirmScreen):  # a doubt asked about: saved as read
        await pilot.press("y")
    await app.workers.wait_for_complete()
    await pilot.pause()
    if app.screen is form:  # refused: leave the form
        await pilot.press("escape")
        await pilot.pause()
        assert len(kept) == before
        return "refused"
    return round(getattr(kept[-1], attr), 9)


@pytest.mark.parametrize("kind", ["reading", "topup", "sample"])
async def test_the_cli_and_the_form_answer_the_same_for_the_same_text(
    plant, capsys, checked_only, kind
):
    """Every number field of the kind (FIELDS) × every text (TEXTS): one app for the kind."""
    kept = checked_only
    with open_book(plant, create=False) as book:
        record.refresh_stale(book)  # each list read after a form is then a read, not fits
    fields = [f for f in FIELDS if f[0] == kind]
    cli = {
        (f[2], t): cli_answer(capsys, kept, plant, *f[:2], *f[3:], t) for f in fields for t in TEXTS
    }
    app = app_for(plant)
    form = {}
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot, WatchScreen)
        for _, target, field, _, attr, others in fields:
            for text in TEXTS:
                answer = await form_answer(pilot, kept, kind, target, field, attr, others, text)
                form[field, text] = answer
    assert form == cli
    # the drift of issue 22 and the one reading of numbers (store.base.units.read_number):
    # a decimal comma is a point, a comma before three digits is asked about, not guessed
    for f in fields:
        assert cli[f[2], "2,5"] == cli[f[2], "2.5"] != "refused"
        assert cli[f[2], "2,500"] == "refused" and cli[f[2], "2 x"] == "refused"


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
