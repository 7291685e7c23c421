"""The command line's quick answers load only what they need.

`status`, `status --json`, `list` (of the register), `--help` and `--version` are run as a
user runs them, in a fresh interpreter with `-X importtime`, on a copy of the demo plant whose
kept rows are fresh (`record.rebuild`): none of them may load numpy, scipy, Textual or the
forecast package (store.forecast). A kept row that is missing has to be computed, and then
the forecast loads: the last test shows the check sees that.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
import sys
from datetime import timedelta
from pathlib import Path

import pytest

from store import record
from store.base.session import fixed_clock
from store.base.timeutil import format_utc, parse_utc
from store.db.book import open_book

ROOT = Path(__file__).resolve().parents[2]
HEAVY_PACKAGES = ("numpy", "scipy", "textual")
# what only an upgrade, a backup or restore, or `log` needs (deferred in store/__init__.py,
# store/db/book.py and tui/cli/commands.py)
UPKEEP_MODULES = ("store.db.backup", "store.db.proof", "store.ledger.entry_input")
# what only a save (a new entry's id), a change to the register or an id typed by hand needs,
# and the neighbours of a tag not found (deferred in store/record.py, store/ledger/register.py
# and store/base/validate.py); `status` as a table shows the watch list through store.sheets,
# which takes difflib for its own look-ups
WRITE_ONLY = ("uuid", "difflib")
# what only a typed time, a local time near a clock change, a plant without a zone or an
# upgrade needs (deferred in store/base/timeutil.py, store/base/validate.py,
# store/health/status_json.py and store/db/book.py); the breathers' median is worked out
# without `statistics` (store/health/fluidcare.py); a stored stamp in its one form is read
# without strptime (store/base/timeutil.py: parse_utc). A fixed clock (SUMPBOOK_NOW) is read
# by dateutil's ISO parser, so the runs below that set one are not checked for it.
TIME_RULES = ("dateutil", "statistics", "_strptime")
LEAN_COMMANDS = [
    ["status"],
    ["status", "--json"],
    ["status", "--json", "--unit", "PR-3"],
    ["list", "filters"],
    ["list", "units"],
    ["list", "breathers"],
    ["--help"],
    ["--version"],
]


def heavy(names: set[str]) -> list[str]:
    """The modules among `names` that the lean path must not load."""
    return sorted(
        n
        for n in names
        if n.split(".")[0] in HEAVY_PACKAGES
        or n == "store.forecast"
        or n in UPKEEP_MODULES
        or n.startswith("store.forecast.")
    )


def time_rules(names: set[str]) -> list[str]:
    """The modules among `names` that only typed times and clock changes need (see TIME_RULES)."""
    return sorted(n for n in names if n.split(".")[0] in TIME_RULES)


def write_only(names: set[str], args: list[str]) -> list[str]:
    """The modules among `names` that only writing needs (see WRITE_ONLY)."""
    kept_off = [m for m in WRITE_ONLY if not (args == ["status"] and m == "difflib")]
    return sorted(n for n in names if n in kept_off)


def imported(book: Path, args: list[str], now: str | None = None) -> set[str]:
    """Every module a `sumpbook` run loaded (from `python -X importtime`'s report)."""
    env = {**os.environ, "SUMPBOOK_DB": str(book)}
    env.pop("SUMPBOOK_NOW", None)
    if now:
        env["SUMPBOOK_NOW"] = now
    done = subprocess.run(
        [sys.executable, "-X", "importtime", "-m", "tui", *args],
        capture_output=True, text=True, env=env, cwd=ROOT, check=False, timeout=120,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-3000:]
    return modules_of(done.stderr)


def modules_of(report: str) -> set[str]:
    """The modules named in `python -X importtime`'s report."""
    return {
        line.split("|")[2].strip()
        for line in report.splitlines()
        if line.startswith("import time:") and "|" in line and "imported package" not in line
    }


@pytest.fixture(scope="module")
def kept_demo(tmp_path_factory) -> tuple[Path, str]:
    """A copy of the demo plant with every kept row fresh, and its frozen clock."""
    from store.exchange.demo import create_demo

    path = tmp_path_factory.mktemp("lean") / "demo.db"
    create_demo(path).close()
    with open_book(path, create=False) as book:
        now = book.now()
    with open_book(path, create=False, clock=fixed_clock(now)) as book:
        record.rebuild(book)
    return path, format_utc(now)


@pytest.mark.parametrize("args", LEAN_COMMANDS, ids=" ".join)
def test_quick_answers_load_no_fitting_maths_nor_textual(kept_demo, args):
    book, _ = kept_demo
    loaded = imported(book, args)
    assert heavy(loaded) == []
    assert write_only(loaded, args) == []
    assert time_rules(loaded) == []


def test_status_a_week_on_loads_no_fitting_maths(kept_demo, tmp_path):
    """The kept rows are time-proof: a week later they are still read, not recomputed."""
    book, now = kept_demo
    later = tmp_path / "later.db"
    shutil.copy(book, later)
    with sqlite3.connect(later) as conn:  # the demo's frozen clock off: SUMPBOOK_NOW counts
        conn.execute("DELETE FROM settings WHERE key = 'clock'")
    conn.close()
    week = format_utc(parse_utc(now) + timedelta(days=7))
    assert heavy(imported(later, ["status", "--json"], now=week)) == []


def test_a_missing_kept_row_is_computed_and_then_the_forecast_loads(kept_demo, tmp_path):
    """The check above is not blind: with one kept row gone the status is computed from the
    entries, which takes the fitting maths."""
    book, _ = kept_demo
    gone = tmp_path / "gone.db"
    shutil.copy(book, gone)
    with sqlite3.connect(gone) as conn:
        conn.execute("DELETE FROM status_cache WHERE rowid = (SELECT min(rowid) FROM status_cache)")
    conn.close()
    loaded = heavy(imported(gone, ["status", "--json"]))
    assert "store.forecast.trend" in loaded and "numpy" in loaded


def test_version_is_the_installed_packages(capsys):
    from importlib.metadata import version

    from tui.cli import main

    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out == f"sumpbook {version('sumpbook')}\n"


def test_a_backup_still_loads_what_it_defers(kept_demo, tmp_path):
    """The upkeep modules are deferred, not gone: `backup` loads store.db.backup (so the
    check above would see them come back onto the lean path)."""
    book, _ = kept_demo
    loaded = imported(book, ["backup", str(tmp_path / "copy.db")])
    assert "store.db.backup" in heavy(loaded)
    assert (tmp_path / "copy.db").stat().st_size > 0


def test_a_note_logged_and_a_tag_not_found_load_what_they_defer(kept_demo, tmp_path):
    """The write-only modules are deferred, not gone: a note logged makes its entry's id
    (uuid), a tag the book does not know is answered with its neighbours (difflib)."""
    book, now = kept_demo
    copy = tmp_path / "note.db"
    shutil.copy(book, copy)
    note = ["log", "note", "--unit", "DCC-2", "--by", "AK", "hose chafing at the clamp"]
    loaded = imported(copy, note, now)
    assert "uuid" in write_only(loaded, ["log"])
    env = {**os.environ, "SUMPBOOK_DB": str(copy), "SUMPBOOK_NOW": now}
    done = subprocess.run(
        [sys.executable, "-X", "importtime", "-m", "tui", "log", "reading", "D2-RX", "--dp", "1", "--by", "AK"],
        capture_output=True, text=True, env=env, cwd=ROOT, check=False, timeout=120,
    )  # fmt: skip
    assert done.returncode == 2 and "did you mean D2-R" in done.stderr
    assert "difflib" in modules_of(done.stderr)


def test_a_typed_time_loads_what_the_time_rules_defer(kept_demo):
    """The time rules are deferred, not gone: `--as-of` is read by dateutil's ISO parser (so
    the check above would see dateutil come back onto the lean path)."""
    book, now = kept_demo
    loaded = imported(book, ["status", "--json", "--as-of", now])
    assert "dateutil.parser.isoparser" in time_rules(loaded)


@pytest.mark.parametrize("how", ["--db", "SUMPBOOK_DB"])
def test_a_script_naming_its_book_loads_no_folder_lookup(kept_demo, how):
    """`status --json` told where the book is (--db or SUMPBOOK_DB), without SUMPBOOK_CONFIG:
    it reads no preferences, so platformdirs (the user's folders) is never loaded; `status`
    as a table reads the preferences and finds them in the user's config folder."""
    book, _ = kept_demo
    env = {k: v for k, v in os.environ.items() if k not in ("SUMPBOOK_CONFIG", "SUMPBOOK_NOW")}
    env.pop("SUMPBOOK_DB", None)
    env["HOME"] = env["XDG_CONFIG_HOME"] = str(book.parent)  # no user prefs of the machine
    named = ["--db", str(book)] if how == "--db" else []
    if how == "SUMPBOOK_DB":
        env["SUMPBOOK_DB"] = str(book)

    def loaded(*args: str) -> set[str]:
        done = subprocess.run(
            [sys.executable, "-X", "importtime", "-m", "tui", *named, *args],
            capture_output=True, text=True, env=env, cwd=ROOT, check=False, timeout=120,
        )  # fmt: skip
        assert done.returncode == 0, done.stderr[-3000:]
        return modules_of(done.stderr)

    assert "platformdirs" not in loaded("status", "--json")
    assert "platformdirs" in loaded("status")  # the check is not blind


@pytest.mark.parametrize("args", [["--help"], ["--version"], ["status", "--help"]], ids=" ".join)
def test_help_and_version_load_no_book_code(kept_demo, args):
    """Nothing is opened for them, so nothing of the book file's code is loaded (store's
    door imports each of its names when first asked for)."""
    book, _ = kept_demo
    loaded = imported(book, args)
    assert sorted(n for n in loaded if n.startswith(("store.db", "store.ledger"))) == []
    assert "tui.cli" in loaded  # the report is read (the check is not blind)
