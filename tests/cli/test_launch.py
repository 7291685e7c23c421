"""The installed command's door (tui/launch.py): the short read-only answers run with the
cyclic collector held, every other command with it running, and the collector is left as it
was found whatever the command did (an answer, a refusal, --help)."""

from __future__ import annotations

import gc
import os
import subprocess
import sys
from pathlib import Path

import pytest

from tui import launch
from tui.cli import commands

ROOT = Path(__file__).resolve().parents[2]


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


def _door(live, *words: str, **kw) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("PYTHONUNBUFFERED", None)  # the output buffered, as a user's is
    return subprocess.run(
        [sys.executable, "-m", "tui", "--db", str(live), *words],
        capture_output=True, env=env, timeout=120, **kw,
    )  # fmt: skip


def test_the_door_as_a_process_gives_the_whole_answer_and_its_exit_code(live, capsys):
    """A held answer leaves without the interpreter's teardown: all of it must be out first."""
    from tui import cli

    assert cli.main(["--db", str(live), "status", "--json"]) == 0
    expected = capsys.readouterr().out.encode()
    done = _door(live, "status", "--json")
    assert (done.returncode, done.stdout, done.stderr) == (0, expected, b"")
    assert cli.main(["--db", str(live), "list", "filters"]) == 0
    listed = capsys.readouterr().out
    done = _door(live, "list", "filters")
    assert done.returncode == 0 and done.stdout.decode().splitlines() == listed.splitlines()
    refused = _door(live, "status", "--unit", "NO-SUCH")
    assert refused.returncode == 2 and refused.stdout == b""
    assert b"NO-SUCH" in refused.stderr and b"Traceback" not in refused.stderr


def test_the_door_into_a_pipe_nobody_reads_says_nothing_more(live):
    """`status --json | head`, the reader gone before the answer: an answer shorter than the
    output buffer (one unit's) first meets the closed pipe at the flush before leaving; the
    exit code is the command's, no trace is printed."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("PYTHONUNBUFFERED", None)  # the answer waits in the buffer, as a user's does
    door = subprocess.Popen(
        [sys.executable, "-m", "tui", "--db", str(live), "status", "--json", "--unit", "PR-3"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
    )  # fmt: skip
    door.stdout.close()  # the only reader, gone before a byte is written
    err = door.stderr.read()
    assert door.wait(timeout=120) == 0, err
    assert err == b""


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs Linux's /dev/full")
def test_the_door_onto_a_full_disk_says_so_in_one_line(live):
    """The answer left in the buffer meets the full disk at the flush before leaving: one line
    and exit code 1, never a trace nor a success."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("PYTHONUNBUFFERED", None)  # the answer waits in the buffer, as a user's does
    with open("/dev/full", "w") as full:
        done = subprocess.run(
            [sys.executable, "-m", "tui", "--db", str(live), "status", "--json", "--unit", "PR-3"],
            stdout=full, stderr=subprocess.PIPE, env=env, timeout=120,
        )  # fmt: skip
    lines = done.stderr.decode().strip().splitlines()
    assert done.returncode == 1
    assert len(lines) == 1 and "could not be written" in lines[0], lines


def test_the_door_with_stdout_closed_gives_no_trace(live):
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("PYTHONUNBUFFERED", None)
    done = subprocess.run(
        [sys.executable, "-m", "tui", "--db", str(live), "status", "--json"],
        stderr=subprocess.PIPE, env=env, timeout=120,
        preexec_fn=lambda: os.close(1),
    )  # fmt: skip
    assert done.returncode != 0
    assert b"Traceback" not in done.stderr and len(done.stderr.splitlines()) == 1, done.stderr
