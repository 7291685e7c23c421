"""The `sumpbook` command line. Every command validates its input and writes nothing on error."""

from __future__ import annotations

import argparse
import os
import re
import sqlite3
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from store.base.errors import BookError
from store.base.session import ENV_DB, from_environ, user_book_path
from store.base.text import inert
from store.base.units import read_number
from store.base.validate import BREATHER_REASONS, CHANGE_REASONS

EXIT_BAD_INPUT = 2
MAX_LIST_LIMIT = 1_000_000
# Options that never take a value: a negative-looking word after them is not theirs.
FLAGS = {
    "--force",
    "--nominal",
    "--hour-meter",
    "--indicator-only",
    "--unfiltered",
    "--json",
    "--as-read",
    "--full",
}
_NEGATIVE_VALUE = re.compile(r"^-(\d|\.\d|/)")  # "-/500/60": counts with no ≥4 µm figure


def _limit(text: str) -> int:
    """--limit: a whole number from 1 (argparse shows the message as one line)."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text[:30]}' is not a whole number") from None
    if not 1 <= value <= MAX_LIST_LIMIT:
        raise argparse.ArgumentTypeError(f"give 1 to {MAX_LIST_LIMIT:,} entries".replace(",", " "))
    return value


class BadNumber(str):
    """A number option that did not read: kept as its message until `main` says it in one
    line (argparse would print its usage block around it)."""


def _number(text: str) -> float | BadNumber:
    """A typed number option, read as the forms read it (store.base.units.read_number: a
    comma may stand for the point; '1,250' is asked about, not guessed)."""
    try:
        return read_number(text)
    except BookError as exc:
        return BadNumber(str(exc))


def _bad_number(args: argparse.Namespace) -> str | None:
    for name, value in vars(args).items():
        if isinstance(value, BadNumber):
            return f"--{name.replace('_', '-')}: {value}"
    return None


def join_negative_values(argv: Sequence[str]) -> list[str]:
    """`--temp -4F` as `--temp=-4F`: argparse takes a word starting with '-' that is not a plain
    number for an option, so a negative value with a unit would be refused."""
    out: list[str] = []
    words = list(argv)
    i = 0
    while i < len(words):
        word = words[i]
        if (
            word.startswith("--")
            and "=" not in word
            and word not in FLAGS
            and word != "--"
            and i + 1 < len(words)
            and _NEGATIVE_VALUE.match(words[i + 1])
        ):
            out.append(f"{word}={words[i + 1]}")
            i += 2
            continue
        out.append(word)
        i += 1
    return out


def _add_time_and_by(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--at",
        help="when it happened: ISO 8601, plant-local unless an offset is given (default: now)",
    )
    p.add_argument("--by", help="technician initials (default: the one signed in on this laptop)")
    p.add_argument("--note", default="", help="free text")


class _Version(argparse.Action):
    """--version: the installed package's version, looked up only when asked for."""

    def __init__(self, option_strings: Sequence[str], dest: str, **kwargs: object) -> None:
        super().__init__(
            option_strings, dest, nargs=0, default=argparse.SUPPRESS, help=kwargs.get("help")
        )

    def __call__(self, parser, namespace, values, option_string=None) -> None:  # noqa: ANN001
        from importlib.metadata import PackageNotFoundError, version

        try:
            number = version("sumpbook")
        except PackageNotFoundError:
            number = "(version unknown: not installed)"
        sys.stdout.write(f"sumpbook {number}\n")  # on stdout, as --help
        parser.exit()


# The commands, as build_parser names them (tests/cli/test_parser_one_command.py holds the two
# together): a run that names one of them builds that command's parser alone.
COMMANDS = frozenset(
    {
        "app", "demo", "register", "list", "log", "status", "round", "export", "import", "prefs",
        "plant", "backup", "restore", "merge", "check", "rebuild", "server", "sync", "fleet",
    }
)  # fmt: skip


class _Unbuilt:
    """Stands for a command's parser that is not built: takes every call, gives itself back."""

    def __getattr__(self, name: str) -> Callable[..., _Unbuilt]:
        return self._take

    def _take(self, *args: object, **kwargs: object) -> _Unbuilt:
        return self


class _OneCommand:
    """The commands' subparsers action, where the run names `command`: its parser is built as
    always, every other one is skipped. The whole parser, thirty-odd of them with their
    options, took some ten milliseconds of every run."""

    def __init__(self, action: argparse._SubParsersAction, command: str) -> None:
        self.action, self.command = action, command

    def add_parser(self, name: str, **kwargs: Any) -> argparse.ArgumentParser:
        if name == self.command:
            return self.action.add_parser(name, **kwargs)
        return _Unbuilt()  # type: ignore[return-value]


def named_command(words: Sequence[str]) -> str | None:
    """The command `words` name, where that is sure (the words before it are --db's); else
    None (help, the version, no command, an unknown or shortened word): the whole parser,
    whose messages name every command."""
    i = 0
    while i < len(words):
        word = words[i]
        if word == "--db":
            i += 2
        elif word.startswith("--db="):
            i += 1
        elif word.startswith("-"):
            return None
        else:
            return word if word in COMMANDS else None
    return None


# What the command line reads before the command's name (argparse also takes a shortened
# option: "--d" for --db).
_BEFORE_COMMAND = ("--db", "--version", "--help")


def stray_option(words: Sequence[str]) -> str | None:
    """The first word before the command that is an option the command line does not read
    there (`--book plant.db status`, `--json status`); else None. argparse would go on and
    take the word after it for the command ("invalid choice: 'plant.db'")."""
    i = 0
    while i < len(words):
        word = words[i]
        if word == "--" or not word.startswith("-") or word == "-h":
            return None  # the command, or what argparse reads after "--", or the help
        name = word.split("=", 1)[0]
        known = [o for o in _BEFORE_COMMAND if name.startswith("--") and o.startswith(name)]
        if not known:
            return word
        if known != ["--db"]:
            return None  # --version, --help: argparse answers them and stops
        i += 1 if "=" in word else 2
    return None


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The command line's parser; with `only` (one of COMMANDS), that command's alone."""
    parser = argparse.ArgumentParser(
        prog="sumpbook",
        description="Offline logbook for hydraulic filters, breathers and fluid care. "
        "Without a command it opens the terminal app.",
    )
    # The default folder is asked of platformdirs only for the whole parser's help: the
    # parser of one named command never prints it (named_command: nothing but --db before it).
    default = user_book_path() if only is None else "the user's data folder"
    parser.add_argument("--db", type=Path, help=f"logbook file (default: ${ENV_DB} or {default})")
    parser.add_argument("--version", action=_Version, help="print the version and stop")
    sub: Any = parser.add_subparsers(dest="command", metavar="COMMAND")
    if only is not None:
        sub = _OneCommand(sub, only)

    p = sub.add_parser("app", help="open the terminal app (the default)")
    p = sub.add_parser("demo", help="create a logbook holding the demo plant")
    p.add_argument("--force", action="store_true", help="replace an existing logbook")

    reg = sub.add_parser("register", help="add to the register: units, fluids, filters, ...")
    rsub = reg.add_subparsers(dest="what", metavar="WHAT", required=True)
    p = rsub.add_parser("tech", help="a technician (initials)")
    p.add_argument("tag", help="initials, e.g. JK")
    p.add_argument("--name", default="", help="full name or role")
    p = rsub.add_parser("fluid", help="a hydraulic fluid")
    p.add_argument("tag")
    p.add_argument("--name", default="")
    p.add_argument("--vg", type=int, help="ISO VG grade (ISO 3448)")
    p.add_argument("--nu40", type=_number, help="kinematic viscosity at 40 °C, mm²/s")
    p.add_argument("--nu100", type=_number, help="kinematic viscosity at 100 °C, mm²/s")
    p.add_argument("--vi", type=_number, help="viscosity index (ASTM D2270)")
    p.add_argument("--density", type=_number, help="density, kg/L")
    p = rsub.add_parser("unit", help="a hydraulic system (power unit)")
    p.add_argument("tag")
    p.add_argument("--name", default="")
    p.add_argument("--area", default="", help="area or line")
    p.add_argument("--reservoir", help="reservoir volume, e.g. 400 or 105gal")
    p.add_argument("--fluid", help="fluid tag")
    p.add_argument("--normal-temp", default="50", help="normal operating temperature (°C)")
    p.add_argument("--max-temp", default="60", help="bulk temperature limit (°C)")
    p.add_argument("--coldest-start", default="15", help="coldest expected start (°C)")
    p.add_argument("--hour-meter", action="store_true", help="the unit has an hour meter")
    p.add_argument("--target-code", help="target ISO 4406 code, e.g. 17/15/12")
    p = rsub.add_parser("filter", help="a filter position (housing)")
    p.add_argument("tag")
    p.add_argument("--unit", required=True, help="unit tag")
    p.add_argument(
        "--kind",
        required=True,
        choices=["suction-strainer", "suction", "pressure", "return", "offline"],
    )
    p.add_argument("--element", default="", help="element part number (free text)")
    p.add_argument("--rating", type=_number, help="rating in µm")
    p.add_argument("--nominal", action="store_true", help="the rating is nominal, not absolute")
    p.add_argument("--beta", type=_number, help="beta ratio at the rating (ISO 16889)")
    p.add_argument("--bypass", help="bypass cracking ΔP, e.g. 3.5 or 50psi")
    p.add_argument("--limit", help="ΔP at which the element is changed")
    p.add_argument("--clean", help="clean-element ΔP at reference conditions")
    p.add_argument("--rated-flow", type=_number, help="rated flow, L/min")
    p.add_argument("--flow", type=_number, help="normal flow through it, L/min")
    p.add_argument("--indicator-only", action="store_true", help="no gauge: indicator states only")
    p.add_argument("--every", type=_number, default=168, help="reading interval, hours (168)")
    p = rsub.add_parser("breather", help="a reservoir breather")
    p.add_argument("tag")
    p.add_argument("--unit", required=True)
    p.add_argument("--kind", default="desiccant", choices=["desiccant", "plain"])
    p.add_argument("--rating", type=_number, help="rating in µm")
    p.add_argument("--every", type=_number, default=90, help="swap interval, days (90)")
    p = rsub.add_parser("shifts", help="the shift pattern, e.g. early=06:00 late=14:00 night=22:00")
    p.add_argument("shifts", nargs="+", metavar="NAME=HH:MM")
    p = rsub.add_parser("change", help="change register fields, e.g. change filter P1-RF limit=2.4")
    p.add_argument("table", choices=["tech", "fluid", "unit", "filter", "breather"])
    p.add_argument("tag")
    p.add_argument("fields", nargs="+", metavar="FIELD=VALUE")
    p.add_argument("--by", help="technician initials")
    p = rsub.add_parser(
        "history", help="who changed what in the register, when, old -> new (oldest first)"
    )
    p.add_argument("tag", nargs="?", help="one record's tag (default: the whole register)")
    p.add_argument("--limit", type=int, help="only the newest this many changes")

    p = sub.add_parser("list", help="show units, filters, breathers, fluids, techs or entries")
    p.add_argument(
        "what", choices=["units", "filters", "breathers", "fluids", "techs", "entries", "shifts"]
    )
    p.add_argument("--unit", help="only this unit")
    p.add_argument("--since", help="entries from this time on (ISO 8601)")
    p.add_argument("--limit", type=_limit, default=200, help="at most this many entries (200)")

    # The entry options are kept as typed: store/ledger/entry_input.py reads them as the
    # forms' fields are read.
    log = sub.add_parser("log", help="record what you did or saw")
    lsub = log.add_subparsers(dest="kind", metavar="KIND", required=True)
    p = lsub.add_parser("reading", help="a ΔP reading or indicator state")
    p.add_argument("tag", help="filter tag")
    p.add_argument("--dp", help="ΔP, e.g. 1.2, 18psi, 120kPa (your unit unless given)")
    p.add_argument("--indicator", choices=["clean", "dirty", "bypass"])
    p.add_argument("--temp", help="fluid temperature, e.g. 45 or 113F")
    p.add_argument("--flow", help="flow, L/min, if known")
    p.add_argument("--hours", help="hour-meter reading")
    p.add_argument(
        "--as-read",
        action="store_true",
        help="save it even though it looks like one nobody made (far over the bypass, or a "
        "second reading in the same minute)",
    )
    _add_time_and_by(p)
    p = lsub.add_parser("change", help="an element change")
    p.add_argument("tag", help="filter tag")
    p.add_argument(  # no default: it decides how the life counts (the app's form asks too)
        "--reason",
        choices=CHANGE_REASONS,
        help="why it came out: it decides how its life counts in the service-life figures",
    )
    p.add_argument("--condition", default="", help="the old element as found")
    p.add_argument("--batch", default="", help="the new element's batch or lot")
    p.add_argument("--hours", help="hour-meter reading")
    _add_time_and_by(p)
    p = lsub.add_parser("topup", help="fluid added to a reservoir")
    p.add_argument("tag", help="unit tag")
    p.add_argument("--volume", required=True, help="volume added, e.g. 20 or 5gal")
    p.add_argument("--fluid", help="fluid tag (default: the unit's fluid)")
    how = p.add_mutually_exclusive_group(required=True)
    how.add_argument("--filtered", metavar="UM", help="filtered on the way in, µm")
    how.add_argument("--unfiltered", action="store_true", help="went in unfiltered")
    p.add_argument("--hours", help="hour-meter reading")
    _add_time_and_by(p)
    p = lsub.add_parser("breather", help="a breather swap")
    p.add_argument("tag", help="breather tag")
    p.add_argument("--reason", default="interval", choices=BREATHER_REASONS)
    p.add_argument("--condition", default="", help="desiccant as found, e.g. '2/3 spent'")
    _add_time_and_by(p)
    p = lsub.add_parser("sample", help="a fluid sample result")
    p.add_argument("tag", help="unit tag")
    p.add_argument("--counts", help="per mL at ≥4/≥6/≥14 µm(c), e.g. 2000/500/60 (or -/500/60)")
    p.add_argument("--code", help="ISO 4406 code, e.g. 18/16/13")
    p.add_argument("--water", help="water content, ppm")
    _add_time_and_by(p)
    p = lsub.add_parser("note", help="a free note (on a unit, or on nothing)")
    p.add_argument("text")
    p.add_argument("--unit", help="unit tag")
    p.add_argument("--at")
    p.add_argument("--by")
    p = lsub.add_parser("void", help="void a mistaken entry (it stays in the book, marked)")
    p.add_argument("id", help="entry id (the first 8 characters are enough)")
    p.add_argument("--reason", required=True, help="why it is void")
    p.add_argument("--at")
    p.add_argument("--by")

    p = sub.add_parser("status", help="the watch list: what is due, what looks wrong")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p.add_argument("--as-of", help="answer as the book stood at this time (ISO 8601)")
    p.add_argument("--unit", help="only this unit")

    p = sub.add_parser(
        "round", help="what to read this shift, in walking order, and why (or --csv)"
    )
    p.add_argument("--unit", help="only this unit")
    p.add_argument("--csv", action="store_true", help="CSV for a clipboard, on stdout")
    p.add_argument("--next", action="store_true", help="the next shift's round, as things stand")
    p.add_argument("--skip", metavar="TAG", help="record that this filter was not read ...")
    p.add_argument("--why", help="... and why (with --skip)")
    p.add_argument("--by")

    p = sub.add_parser("export", help="the shift log as CSV")
    when = p.add_mutually_exclusive_group()
    when.add_argument(
        "--shift", default=None, help="current, previous or YYYY-MM-DD/NAME (default: current)"
    )
    when.add_argument("--from", dest="from_", metavar="TIME", help="from this time (ISO 8601)")
    p.add_argument("--to", metavar="TIME", help="up to this time (with --from; default now)")
    p.add_argument("-o", "--output", type=Path, help="CSV file to write (default: stdout)")
    p.add_argument(
        "--force", action="store_true", help="overwrite the -o file if it exists, without asking"
    )
    p.add_argument(
        "--entries-only",
        action="store_true",
        help="leave out the status rows (flags and due dates as at the end of the span) that "
        "follow the entries, and their columns: the entries alone, for scripts",
    )
    p.add_argument(
        "--bom",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="start with UTF-8's byte-order mark, so that a spreadsheet reads ν, °C, µm "
        "right (default: yes with -o, no on stdout)",
    )

    p = sub.add_parser("import", help="read entries from a CSV file (all or nothing)")
    p.add_argument("file", type=Path)

    p = sub.add_parser("prefs", help="this laptop's settings: tech=JK pressure=psi temp=F ...")
    p.add_argument(
        "settings",
        nargs="*",
        metavar="KEY=VALUE",
        help="tech, pressure (bar/psi/kPa), temperature (C/F), volume (L/gal), "
        "theme (dark/light/contrast)",
    )
    p = sub.add_parser("plant", help="the plant's settings in the book: name=..., timezone=...")
    p.add_argument("settings", nargs="*", metavar="KEY=VALUE")

    p = sub.add_parser("backup", help="write a consistent copy of the logbook")
    p.add_argument("dest", type=Path)
    p = sub.add_parser(
        "restore",
        help="replace the logbook by a checked copy (the current one is kept as a backup)",
    )
    p.add_argument("file", type=Path)
    p = sub.add_parser("merge", help="bring in the entries and register of another laptop's book")
    p.add_argument("other", type=Path)
    p = sub.add_parser(
        "check",
        help="check the whole logbook file for damage (a damaged book refuses writes until "
        "restored)",
    )
    p = sub.add_parser("rebuild", help="rebuild derived tables (status cache) from the entries")
    _add_server_commands(sub)
    return parser


def _add_server_option(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--server",
        metavar="URL",
        help="the central server (default: this laptop's 'server' pref, else libpq's PG* "
        "variables and service file); a password here is used, never kept or shown",
    )


def _add_server_commands(sub: Any) -> None:  # the subparsers action, or _OneCommand
    """The central PostgreSQL store (the optional 'server' extra)."""
    srv = sub.add_parser("server", help="the central PostgreSQL store: set it up, point at it")
    ssub = srv.add_subparsers(dest="action", metavar="ACTION", required=True)
    p = ssub.add_parser("init", help="create or upgrade the sumpbook schema (as its owner)")
    p.add_argument("url", metavar="URL")
    p = ssub.add_parser("use", help="point this laptop at a server and name the book's plant")
    p.add_argument("url", metavar="URL", help="postgresql://user@host/db (no password)")
    p.add_argument("--plant", required=True, help="the plant's code, the same on every laptop")
    p = sub.add_parser("sync", help="send this book's new rows to the server, bring the plant's in")
    _add_server_option(p)
    p.add_argument("--plant", help="the plant's code (once; then kept in the book)")
    p.add_argument(
        "--full", action="store_true", help="read every row of the plant again (after conflicts)"
    )
    fleet = sub.add_parser("fleet", help="every plant on the server: what is due, element lives")
    fsub = fleet.add_subparsers(dest="view", metavar="VIEW", required=True)
    p = fsub.add_parser("due", help="flagged, overdue and due this week, per plant")
    _add_server_option(p)
    p.add_argument("--plant", help="one plant only")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p = fsub.add_parser("lives", help="element lives per part number and plant (Weibull)")
    _add_server_option(p)
    p.add_argument("--plant", help="one plant only")
    p.add_argument("--element", help="one element part number only")
    p.add_argument("--json", action="store_true", help="machine-readable output")


NO_TERMINAL = (
    "the app needs a terminal to read keys from and draw on, and this has none (a script, a "
    "pipe, a scheduled job?); nothing was opened. In a script, ask with `sumpbook status`, "
    "`sumpbook list` or `sumpbook export` (`sumpbook --help` lists them all)"
)


def _has_terminal() -> bool:
    """Whether the app can run here: Textual reads keys from stdin and draws on stderr (a
    stdout sent to a file does not stop it). Without them it would wait on a closed input
    for ever, a core busy, drawing into whatever stderr is."""
    streams = (sys.stdin, sys.stderr)
    try:
        return all(s is not None and s.isatty() for s in streams)
    except (AttributeError, ValueError):  # replaced or closed streams
        return False


def run(args: argparse.Namespace) -> int:
    from tui.cli import commands  # deferred: --help, --version and the app need none of it

    handler: Callable[[argparse.Namespace], int] = getattr(commands, f"cmd_{args.command}")
    code = handler(args)
    commands.report_unreadable()
    return code


def reader_gone() -> None:
    """The reader of the answer left early (`| head`): what is still to be written goes to
    the null device, so that no later flush fails on the closed pipe."""
    os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())


def main(
    argv: Sequence[str] | None = None, loaded: Callable[[str | None], None] | None = None
) -> int:
    """The command line. `loaded`: told the command once the words are parsed (tui/launch.py
    lets the cyclic collector run again there, but for the short answers)."""
    words = join_negative_values(sys.argv[1:] if argv is None else argv)
    if (stray := stray_option(words)) is not None:
        print(
            f"sumpbook: unknown option {inert(stray)}: before the command only --db FILE, "
            "--version and --help are read; a command's own options go after its name "
            "(sumpbook --help lists the commands)",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    args = build_parser(named_command(words)).parse_args(words)
    if loaded is not None:
        loaded(args.command)
    if (bad := _bad_number(args)) is not None:
        print(f"sumpbook: {inert(bad)}; nothing was written", file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        args.session = session = from_environ(os.environ)  # the one reading of the environment
    except BookError as exc:
        print(f"sumpbook: {inert(str(exc))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    if args.command in (None, "app"):
        if not _has_terminal():
            print(f"sumpbook: {NO_TERMINAL}", file=sys.stderr)
            return EXIT_BAD_INPUT
        from tui.app import run_app  # textual loads only when the app runs

        try:
            return run_app(args.db, session)
        except BookError as exc:
            print(f"sumpbook: {inert(str(exc))}", file=sys.stderr)
            return EXIT_BAD_INPUT
    try:
        return run(args)
    except BookError as exc:
        from tui.cli import commands

        commands.report_unreadable()
        print(f"sumpbook: {inert(str(exc))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except UnicodeError:
        print(
            "sumpbook: the input holds characters that are not text (a wrong encoding?); "
            "nothing was written",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    except OverflowError:
        print(
            "sumpbook: a value is too large for the logbook (a time or a number out of range); "
            "nothing was written",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    except sqlite3.IntegrityError as exc:  # the schema's last line refused a value
        print(
            f"sumpbook: the logbook refused a value ({exc}); nothing was written", file=sys.stderr
        )
        return EXIT_BAD_INPUT
    except sqlite3.DatabaseError as exc:  # a read met a damaged page (writes are checked first)
        from store import damaged_read

        print(
            f"sumpbook: {inert(str(damaged_read(exc, args.db or session.db_path)))}",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        reader_gone()
        return 0
    except Exception as exc:  # a bug: one line for the user, the trace on request
        if session.debug:
            raise
        print(
            f"sumpbook: unexpected error ({type(exc).__name__}: {inert(str(exc))}); nothing more was "
            "written. Run again with SUMPBOOK_DEBUG=1 for the details.",
            file=sys.stderr,
        )
        return 1
