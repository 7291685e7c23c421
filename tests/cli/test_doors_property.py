"""Every door driven with generated values (hypothesis): the command line, CSV import,
register changes and another laptop's (older, unchecked) logbook brought in by merge.

After each accepted write the book must still read whole: `list entries`, `export` and
`status --json` (valid JSON, no NaN or Infinity) succeed. After each refused write the logbook
file (and its write-ahead log) is byte for byte what it was. The counts of inputs tried and
refused are printed (`pytest -s`) and kept in README's "Your data" section.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import re
import sqlite3
import uuid
from collections import Counter
from datetime import datetime
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from store.db.book import open_book
from store.db.schema import MIGRATIONS
from tests.kit.plant import fill_register
from tui.cli import main

EXAMPLES = int(__import__("os").environ.get("DOORS_EXAMPLES", "50"))
SETTINGS = settings(
    max_examples=EXAMPLES,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
    database=None,
    derandomize=True,  # the same inputs on every run: the figures in README repeat
)
TRIED: Counter[str] = Counter()
REFUSED: Counter[str] = Counter()


@pytest.fixture(autouse=True, scope="module")
def _report_counts():
    """After the module's doors have run, print the figures kept in README (run with -s)."""
    yield
    for door in sorted(TRIED):
        print(f"door {door}: {TRIED[door]} tried, {REFUSED[door]} refused")


# Values a hostile or careless hand might type: numbers at and past every edge, words, escapes.
NUMBERS = st.one_of(
    st.floats(min_value=0.05, max_value=3.0).map(lambda x: f"{x:.2f}"),  # plausible values
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(min_value=-(10**25), max_value=10**25).map(str),
    st.sampled_from(["inf", "-inf", "nan", "1e308", "-0", "0", "=1+1", "", " ", "1,5", "3.5"]),
)
TEXT = st.one_of(
    st.text(max_size=40),
    st.sampled_from(["\x1b]0;x\x07\x1b[2J", "\x9b31m", "a\x7fb", "x" * 2500, "=1+2", "a b"]),
)
TIMES = st.one_of(
    st.datetimes(min_value=datetime(2026, 1, 1), max_value=datetime(2026, 11, 28)).map(
        lambda d: d.isoformat(timespec="minutes")
    ),
    st.datetimes().map(lambda d: d.isoformat(timespec="minutes")),
    st.sampled_from(
        [
            "0999-11-27T08:00",
            "1900-01-01T00:00",
            "0001-01-01T00:00",
            "9999-12-31T23:59-12:00",
            "2026-02-30T10:00",
            "2026-11-27 10:00:00",
            "2026-10-25T02:30",
            "yesterday",
        ]
    ),
)


@pytest.fixture
def plant(tmp_path):
    db = tmp_path / "prop.db"
    with open_book(db) as book:
        fill_register(book)
        book.set_setting("timezone", "Europe/Vienna")
        book.conn.execute(
            "INSERT INTO settings(key, value) VALUES ('clock', '2026-11-27T12:30:00Z')"
        )
    (tmp_path / "prefs.json").write_text(json.dumps({"tech": "AB"}), encoding="utf-8")
    return db


def _cli(db: Path, *argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(["--db", str(db), *argv])
        except SystemExit as exc:  # argparse's own refusals
            code = int(exc.code or 0)
    return code, out.getvalue(), err.getvalue()


def _state(db: Path) -> tuple[bytes, bytes]:
    wal = Path(f"{db}-wal")
    return db.read_bytes(), wal.read_bytes() if wal.exists() else b""


def _no_constant(name: str) -> None:
    raise AssertionError(f"status --json printed {name}")


def _still_reads(db: Path) -> None:
    for argv in (("list", "entries", "--limit", "50"), ("export", "--from", "1970-01-02T00:00")):
        code, _, err = _cli(db, *argv)
        assert code == 0, (argv, err)
        assert "could not be read" not in err, err
    code, out, err = _cli(db, "status", "--json")
    assert code == 0, err
    json.loads(out, parse_constant=_no_constant)


def _door(name: str, db: Path, write) -> None:  # noqa: ANN001 - a callable returning a code
    before = _state(db)
    code, out, err = write()
    TRIED[name] += 1
    assert "unexpected error" not in err and "Traceback" not in err, err
    assert "damaged" not in err, err
    if code == 0:
        _still_reads(db)
    else:
        REFUSED[name] += 1
        assert code == 2, (code, out, err)
        assert _state(db) == before


@SETTINGS
@given(
    kind=st.sampled_from(["reading", "change", "topup", "note", "sample"]),
    number=NUMBERS,
    temp=st.one_of(NUMBERS, st.sampled_from(["-4F", "-40", "151", "113F"])),
    at=st.one_of(st.none(), TIMES),
    note=TEXT,
)
def test_command_line(plant, kind, number, temp, at, note):
    argv = ["log", kind]
    if kind == "reading":
        argv += ["P1-RF", "--dp", number, "--temp", temp]
    elif kind == "change":
        argv += ["P1-RF", "--hours", number]
    elif kind == "topup":
        argv += ["P1", "--volume", number, "--filtered", temp]
    elif kind == "sample":
        argv += ["P1", "--water", number]
    else:
        argv = ["log", "note", note or "x", "--unit", "P1"]
    if at is not None:
        argv += ["--at", at]
    if kind != "note":
        argv += ["--note", note]
    _door("command line", plant, lambda: _cli(plant, *argv))


@SETTINGS
@given(
    kind=st.sampled_from(["reading", "note", "topup", "change", "bogus"]),
    time=TIMES,
    number=NUMBERS,
    note=TEXT,
    target=st.sampled_from(["P1-RF", "P1", "=1+2", "a b", ""]),
    unterminated=st.booleans(),
)
def test_csv_import(plant, tmp_path, kind, time, number, note, target, unterminated):
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(["time", "kind", "target", "by", "dp_bar", "volume_l", "hours", "note"])
    writer.writerow([time, kind, target, "AB", number, number, number, note])
    text = buffer.getvalue()
    if unterminated:
        text += '2026-11-01T08:00,note,P1,AB,,,,"never closed'
    path = tmp_path / "in.csv"
    path.write_bytes(text.encode("utf-8", "surrogatepass"))
    _door("CSV import", plant, lambda: _cli(plant, "import", str(path)))


REGISTER_FIELDS = {
    "filter P1-RF": [
        "reading_interval",
        "rated_flow",
        "normal_flow",
        "rating",
        "beta_ratio",
        "limit",
        "clean",
        "bypass",
        "element",
    ],
    "unit P1": ["reservoir", "name", "area", "normal_temp", "max_temp", "coldest_start"],
    "fluid HV46": ["nu40", "nu100", "vi", "density_kg_l", "iso_vg", "name"],
    "breather P1-BR": ["swap_interval", "rating"],
    "tech AB": ["name", "active"],
}


@SETTINGS
@given(
    record=st.sampled_from(sorted(REGISTER_FIELDS)),
    data=st.data(),
    value=st.one_of(NUMBERS, TEXT),
)
def test_register_changes(plant, record, data, value):
    field = data.draw(st.sampled_from(REGISTER_FIELDS[record]))
    table, tag = record.split()
    _door(
        "register",
        plant,
        lambda: _cli(plant, "register", "change", table, tag, f"{field}={value}"),
    )


def _older_book(path: Path, entry: dict, unit: dict, filter_row: dict) -> None:
    """Another laptop's logbook as sumpbook 3 wrote them: nothing but schema 1's checks."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript("\n".join(MIGRATIONS[:3]))
    conn.execute("PRAGMA application_id = 1398099280")
    conn.execute("PRAGMA user_version = 3")
    conn.execute("INSERT INTO technicians(tag, name) VALUES ('AB', 'A.B.')")
    for table, row in (("units", unit), ("filters", filter_row), ("entries", entry)):
        try:
            conn.execute(
                f"INSERT INTO {table} ({', '.join(row)}) VALUES ({', '.join('?' for _ in row)})",
                list(row.values()),
            )
        except sqlite3.Error:
            pass  # schema 1 refused it already: the file simply lacks that row
    conn.close()


CELLS = st.one_of(
    st.none(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    TEXT,
)


@settings(SETTINGS, max_examples=max(1, EXAMPLES * 3 // 5))  # each builds and upgrades a file
@given(
    column=st.sampled_from(
        ["dp_bar", "temp_c", "hours", "flow_lpm", "note", "at_utc", "unit", "indicator"]
    ),
    cell=st.one_of(CELLS, TIMES),
    unit_column=st.sampled_from(["reservoir_l", "name", "tag", "normal_temp_c"]),
    unit_cell=CELLS,
    interval=st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True)),
)
def test_merge_of_crafted_books(plant, tmp_path, column, cell, unit_column, unit_cell, interval):
    other = tmp_path / f"other-{uuid.uuid4().hex[:8]}.db"
    entry = {
        "id": str(uuid.uuid4()),
        "at_utc": "2026-11-20T08:00:00Z",
        "logged_utc": "2026-11-20T08:00:00Z",
        "kind": "reading",
        "by": "AB",
        "unit": "P1",
        "filter": "P1-RF",
        "dp_bar": 1.0,
        "note": "",
        column: cell,
    }
    unit = {"tag": "P2", "name": "Press 2", unit_column: unit_cell}
    filter_row = {"tag": "P2-RF", "unit": "P2", "kind": "return", "reading_interval_h": interval}
    _older_book(other, entry, unit, filter_row)

    def write() -> tuple[int, str, str]:
        code, out, err = _cli(plant, "merge", str(other))
        if code == 2:
            return code, out, err
        found = re.search(r"(\d+) entries added", out)
        took = (found and int(found.group(1)) > 0) or any(
            words in out
            for words in ("register: added", "register changes brought in", "settings taken")
        )
        # a merge that took nothing in counts as refused: nothing may have changed
        return (0 if took else 2), out, err

    _door("merge", plant, write)


@SETTINGS
@given(
    column=st.sampled_from(
        ["dp_bar", "temp_c", "hours", "flow_lpm", "note", "at_utc", "logged_utc", "unit", "by",
         "indicator", "kind", "id", "filter"]
    ),
    cell=st.one_of(CELLS, TIMES),
)  # fmt: skip
def test_merge_rows_of_a_current_book(plant, tmp_path, column, cell):
    """The rows of another book as merge reads them, past the other file's own checks (a book
    edited by hand, or written by a program that is not sumpbook): merge's checks alone."""
    from store.exchange.merge import MergeReport, _Merger, _Snapshot

    entry = {
        "id": str(uuid.uuid4()),
        "at_utc": "2026-11-20T08:00:00Z",
        "logged_utc": "2026-11-20T08:00:00Z",
        "kind": "reading",
        "by": "AB",
        "unit": "P1",
        "filter": "P1-RF",
        "dp_bar": 1.0,
        "note": "",
        column: cell,
    }
    snapshot = _Snapshot(register={}, register_log=[], shifts=[], settings={}, entries=[entry])

    def write() -> tuple[int, str, str]:
        with open_book(plant) as book:
            report = MergeReport(other=tmp_path / "other.db")
            for table in ("technicians", "fluids", "units", "filters", "breathers"):
                snapshot.register[table] = []
            with book.atomic():
                _Merger(book, snapshot, report).run()
        return (0 if report.entries_added else 2), report.summary(), "\n".join(report.conflicts)

    _door("merge rows", plant, write)
