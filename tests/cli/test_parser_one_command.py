"""A run that names a command builds that command's parser alone (tui.cli.named_command): every
answer of the parser (what it reads, its help, its messages and exit codes) is the whole
parser's. Checked over every command and sub-command's help, wrong and missing options, and
runs as the README and DEVELOPERS.md show them."""

from __future__ import annotations

import argparse
import contextlib
import io

import pytest

from tui.cli import (
    COMMANDS,
    build_parser,
    join_negative_values,
    main,
    named_command,
    stray_option,
)


def _subcommands(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    return {}


def _outcome(parser: argparse.ArgumentParser, words: list[str]) -> tuple:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            args = parser.parse_args(words)
        except SystemExit as exc:
            return ("exit", exc.code, out.getvalue(), err.getvalue())
    return ("read", sorted((k, repr(v)) for k, v in vars(args).items()), out.getvalue())


def _every_help() -> list[list[str]]:
    runs = []
    for name, sub in _subcommands(build_parser()).items():
        runs += [[name, "--help"], [name, "--no-such-option"], [name]]
        for inner in _subcommands(sub):
            runs += [[name, inner, "-h"], [name, inner, "--no-such-option"], [name, inner]]
    return runs


RUNS = [
    ["status", "--json"],
    ["--db", "b.db", "status", "--json", "--unit", "U1", "--as-of", "2026-01-01T00:00Z"],
    ["--db=b.db", "list", "filters", "--limit", "5"],
    ["list", "entries", "--limit", "x"],
    ["list", "nothing-such"],
    ["log", "reading", "P1-RF", "--dp", "2.5", "--temp", "-4F", "--by", "AB"],
    ["log", "reading", "P1-RF", "--dp", "two"],
    ["log", "topup", "U1", "--litres", "20", "--unfiltered"],
    ["export", "--shift", "previous", "-o", "x.csv", "--bom"],
    ["export", "--shift", "previous", "--from", "2026-01-01"],
    ["register", "filter", "P1-RF", "--unit", "U1"],
    ["register", "change", "filter", "P1-RF", "limit=2.4"],
    ["prefs", "tech=AB", "pressure=psi"],
    ["round", "--skip", "P1-RF"],
    ["sync", "--full"],
    ["fleet", "due", "--json"],
    ["status", "--db", "b.db"],  # --db after the command: the whole parser would refuse it too
    ["--db"],
    ["--db", "status"],
    ["--db", "status", "list", "units"],  # 'status' is --db's file, 'list' the command
    ["stat"],
    ["frobnicate", "--json"],
    ["--db", "b.db", "--db", "c.db", "status"],
]


@pytest.mark.parametrize("words", RUNS + _every_help(), ids=" ".join)
def test_one_command_reads_as_the_whole_parser(words):
    words = join_negative_values(words)
    only = named_command(words)
    assert only is None or only in COMMANDS
    assert _outcome(build_parser(only), words) == _outcome(build_parser(), words)


def test_the_named_commands_are_the_parsers():
    assert COMMANDS == set(_subcommands(build_parser()))


@pytest.mark.parametrize(
    ("words", "named"),
    [
        (["status", "--json"], "status"),
        (["--db", "status", "list", "units"], "list"),  # 'status' is --db's file here
        (["--db=x.db", "export"], "export"),
        (["--help"], None),
        (["--version"], None),
        (["--d", "x.db", "status"], None),  # a shortened option: the whole parser reads it
        ([], None),
        (["stat"], None),  # not a command: the whole parser says which there are
    ],
)
def test_named_command(words, named):
    assert named_command(words) == named


@pytest.mark.parametrize(
    ("words", "stray"),
    [
        (["--book", "plant.db", "status"], "--book"),  # a wrong name for --db
        (["--json", "status"], "--json"),  # a command's option before its name
        (["--db", "x.db", "--unit", "U1", "status"], "--unit"),
        (["-x"], "-x"),
        (["--db", "x.db", "status", "--book"], None),  # after the command: argparse's to say
        (["--d", "x.db", "status"], None),  # argparse takes "--d" for --db
        (["--db=x.db", "status"], None),
        (["--ver"], None),
        (["-h"], None),
        (["--", "status"], None),
        (["--db"], None),  # argparse says --db wants its file
        ([], None),
    ],
)
def test_stray_option(words, stray):
    assert stray_option(words) == stray


def test_a_stray_option_is_named_and_nothing_runs(capsys, tmp_path):
    book = tmp_path / "plant.db"
    assert main(["--book", str(book), "demo"]) == 2
    err = capsys.readouterr().err
    # Before the check argparse said "invalid choice: '<the file>'", naming the wrong word.
    assert err.startswith("sumpbook: unknown option --book: before the command only --db FILE")
    assert str(book) not in err
    assert not book.exists()
