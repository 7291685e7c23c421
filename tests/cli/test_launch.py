"""The installed command's door (tui/launch.py): the short read-only answers run with the
cyclic collector held, every other command with it running, and the collector is left as it
was found whatever the command did (an answer, a refusal, --help)."""

from __future__ import annotations

import gc

import pytest

from tui import launch
from tui.cli import commands


@pytest.fixture
def seen_by(monkeypatch):
    """Where a command's own work starts (its handler), whether the collector is running."""
    seen: dict[str, bool] = {}

    def spy(name: str):
        real = getattr(commands, name)

        def handler(args):
            seen[name] = gc.isenabled()
            return real(args)

        monkeypatch.setattr(commands, name, handler)

    for name in ("cmd_status", "cmd_list", "cmd_export", "cmd_log"):
        spy(name)
    return seen


@pytest.mark.parametrize(
    ("words", "handler", "held"),
    [
        (["status", "--json"], "cmd_status", True),
        (["status"], "cmd_status", True),
        (["list", "units"], "cmd_list", True),
        (["export", "-o", "{out}"], "cmd_export", False),
        (["log", "note", "checked the breather", "--by", "AK"], "cmd_log", False),
    ],
)
def test_short_answers_hold_the_collector_the_rest_let_it_run(
    live, tmp_path, seen_by, capsys, words, handler, held
):
    words = [w.replace("{out}", str(tmp_path / "out.csv")) for w in words]
    assert gc.isenabled()
    assert launch.main(["--db", str(live), *words]) == 0
    assert seen_by[handler] is (not held)
    assert gc.isenabled()  # as found


def test_the_collector_is_left_as_found_after_a_refusal_and_after_help(live, tmp_path, capsys):
    assert launch.main(["--db", str(live), "status", "--unit", "NO-SUCH"]) == 2
    assert gc.isenabled()
    with pytest.raises(SystemExit):
        launch.main(["--help"])
    assert gc.isenabled()
    gc.disable()  # a caller that runs without the collector keeps it off
    try:
        assert launch.main(["--db", str(live), "export", "-o", str(tmp_path / "out.csv")]) == 0
        assert not gc.isenabled()
    finally:
        gc.enable()


def test_the_held_answer_is_the_same_answer(live, capsys):
    """The collector changes when memory is freed, never what is computed."""
    assert launch.main(["--db", str(live), "status", "--json"]) == 0
    held = capsys.readouterr().out
    from tui import cli

    assert cli.main(["--db", str(live), "status", "--json"]) == 0
    assert capsys.readouterr().out == held
