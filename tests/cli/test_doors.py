"""One check at every door (issue 14) and contradictions refused (issue 12): the CLI, the
register, CSV import, merge and the schema itself refuse what no one could have typed, with
one clear line, and reading survives a bad row."""

from __future__ import annotations

import json
import math
import shutil
import sqlite3
import uuid
from pathlib import Path

import pytest

from store import record, views
from store.base import validate
from store.base.errors import BookError
from store.base.timeutil import parse_time, zone
from store.db.book import open_book
from store.db.schema import MIGRATIONS
from store.exchange.csvio import import_csv
from store.exchange.demo import create_demo
from store.exchange.merge import MergeReport, _Merger, _read, merge
from store.ledger import journal, register
from store.ledger.entries import Note, Reading, TopUp
from store.ledger.register import FilterPosition, Technician
from tui.cli import join_negative_values, main


@pytest.fixture(scope="module")
def demo_template(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    create_demo(path).close()
    return path


@pytest.fixture
def demo(tmp_path, demo_template, monkeypatch):
    path = tmp_path / "demo.db"
    shutil.copy(demo_template, path)
    (tmp_path / "prefs.json").write_text(json.dumps({"tech": "AK"}), encoding="utf-8")
    return path


def run(capsys, db, *argv):
    try:
        code = main(["--db", str(db), *argv])
    except SystemExit as exc:  # argparse refuses a value with its usage and one error line
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def refused(capsys, db, *argv):
    """Run a command that must be refused: exit 2, one line, no traceback, file unchanged."""
    before = Path(db).read_bytes()
    code, out, err = run(capsys, db, *argv)
    assert code == 2, (argv, out, err)
    lines = [line for line in err.splitlines() if line.strip()]
    assert lines and lines[-1].startswith("sumpbook"), err
    assert "unexpected error" not in err and "Traceback" not in err
    assert "damaged" not in err, err
    assert Path(db).read_bytes() == before
    return err


# ---- the shared checks --------------------------------------------------------------------------


@pytest.mark.parametrize("value", [math.inf, -math.inf, math.nan, 1e308, "=1+1", True])
def test_numbers_must_be_finite_numbers_in_range(value):
    with pytest.raises(BookError):
        validate.number("reading_interval_h", value)


def test_ranges_say_the_range():
    # common practice, no source: a reading interval above 0 h, up to two years
    with pytest.raises(BookError, match="reading interval 0 h is outside its range, above 0"):
        validate.number("reading_interval_h", 0)
    assert validate.number("reading_interval_h", 168) == 168
    assert validate.number("iso_vg", 46.0) == 46  # ISO 3448: VG 46 is a grade


@pytest.mark.parametrize("text", ["a\x1b[2Jb", "x\x9by", "del\x7f", "bell\x07"])
def test_text_refuses_control_and_escape_characters(text):
    with pytest.raises(BookError, match="control character"):
        validate.text("note", text, multiline=True)


def test_note_keeps_line_breaks_and_turns_cr_into_lf():
    assert validate.text("note", "one\r\ntwo\rthree\tfour", multiline=True) == (
        "one\ntwo\nthree\tfour"
    )
    with pytest.raises(BookError, match="longer than 2000"):
        validate.text("note", "x" * 5_000_000, multiline=True)


@pytest.mark.parametrize("tag", ["=1+2", "a b", "", "X" * 17, "-A"])
def test_tags(tag):
    with pytest.raises(BookError, match="not a usable"):
        validate.tag(tag)


@pytest.mark.parametrize(
    "stamp",
    ["2026-02-30T10:00:00Z", "2026-11-27 10:00:00", "999-11-27T08:00:00Z", "1969-12-31T23:59:59Z"],
)
def test_stamps(stamp):
    assert validate.stamp_problem(stamp)


def test_good_stamps():
    assert validate.stamp_problem("2026-11-27T10:00:00Z") is None
    assert validate.stamp_problem("2026-11-27T10:00:00.123456Z") is None


@pytest.mark.parametrize(
    "name", ["../../etc/passwd", "/etc/localtime", "Europe/../../x", "Nowhere/City"]
)
def test_timezone_must_be_an_iana_name(name):
    with pytest.raises(BookError, match="unknown time zone"):
        validate.timezone_name(name)
    with pytest.raises(BookError):
        zone(name)


def test_parse_time_window():
    local = zone("Europe/Vienna")
    now = parse_time("2026-11-27T12:00Z", local, allow_future=True)
    for text in ("0999-11-27T08:00", "1900-01-01T00:00", "0001-01-01T00:00"):
        with pytest.raises(BookError, match="1970"):
            parse_time(text, local, now=now)
    with pytest.raises(BookError):
        parse_time("9999-12-31T23:59-12:00", local, now=now)


def test_dst_overlap_says_which_offset_was_taken():
    # Europe/Vienna: clocks go back at 03:00 CEST on 2026-10-25 (EU summer-time rule,
    # Directive 2000/84/EC: last Sunday of October, 01:00 UTC)
    local = zone("Europe/Vienna")
    notes: list[str] = []
    now = parse_time("2026-11-27T12:00Z", local, allow_future=True)
    taken = parse_time("2026-10-25T02:30", local, now=now, notes=notes)
    assert taken.isoformat() == "2026-10-25T00:30:00+00:00"  # first passing, UTC+02:00
    assert notes and "UTC+02:00" in notes[0] and "02:30+01:00" in notes[0]
    notes.clear()
    parse_time("2026-10-24T02:30", local, now=now, notes=notes)
    assert notes == []


# ---- the command line ---------------------------------------------------------------------------

UNCLEAR_BEFORE = [
    ("log", "note", "x", "--unit", "DCC-2", "--at", "0999-11-27T08:00"),
    ("log", "note", "x", "--at", "0001-01-01T00:00"),
    ("log", "note", "x", "--at", "9999-12-31T23:59-12:00"),
    ("log", "reading", "D2-R", "--dp", "1", "--at", "1900-01-01T00:00"),
    ("log", "change", "D2-R", "--reason", "limit", "--at", "1900-01-01T00:00"),
    ("log", "change", "D2-R"),  # no reason: it decides how the life counts
    ("status", "--as-of", "0001-01-01T00:00"),
    ("export", "--shift", "9999-12-31/night"),
    ("export", "--from", "0001-01-01T00:00"),
    ("list", "entries", "--limit", "99999999999999999999"),
    ("list", "entries", "--limit", "0"),
    ("list", "entries", "--limit", "-1"),
    ("list", "entries", "--since", "0001-01-01T00:00"),
    ("plant", "timezone=../../etc/passwd"),
    ("plant", "name=bad\x1b]0;title\x07"),
    ("log", "reading", "D2-R", "--dp", "1", "--flow", "inf"),
    ("log", "reading", "D2-R", "--dp", "nan"),
    ("log", "reading", "D2-R", "--dp", "1", "--hours", "1e308"),
    ("log", "note", "x\x9b2J", "--unit", "DCC-2"),
    ("log", "topup", "DCC-2", "--volume", "5", "--filtered", "inf"),
    ("log", "sample", "DCC-2", "--water", "inf"),
]


@pytest.mark.parametrize("argv", UNCLEAR_BEFORE)
def test_bad_inputs_get_one_clear_line_and_write_nothing(demo, capsys, argv):
    refused(capsys, demo, *argv)


REGISTER_RANGES = [
    ("filter", "D2-R", "reading_interval=0", "reading interval"),
    ("filter", "D2-R", "reading_interval=inf", "reading interval"),
    ("filter", "D2-R", "reading_interval=1e308", "reading interval"),
    ("filter", "D2-R", "reading_interval=nan", "reading interval"),
    ("filter", "D2-R", "rated_flow=-1", "rated flow"),
    ("filter", "D2-R", "rated_flow=inf", "rated flow"),
    ("filter", "D2-R", "normal_flow=inf", "normal flow"),
    ("filter", "D2-R", "rating=0", "rating"),
    ("filter", "D2-R", "rating=inf", "rating"),
    ("filter", "D2-R", "beta_ratio=inf", "beta ratio"),
    ("filter", "D2-R", "beta_ratio=0.5", "beta ratio"),
    ("filter", "D2-R", "element=E\x1b[2J", "control character"),
    ("filter", "D2-R", "element=" + "x" * 61, "longer than 60"),
    ("unit", "DCC-2", "reservoir=-1", "reservoir"),
    ("unit", "DCC-2", "reservoir=inf", "reservoir"),
    ("unit", "DCC-2", "name=" + "n" * 81, "longer than 80"),
    ("unit", "DCC-2", "area=Hall\x1b]0;x", "control character"),
    ("fluid", "HM46", "nu40=0", "ν40"),
    ("fluid", "HM46", "nu40=inf", "ν40"),
    ("fluid", "HM46", "vi=inf", "viscosity index"),
    ("fluid", "HM46", "density=inf", "density"),
    ("fluid", "HM46", "density=0", "density"),
    ("breather", "D2-BR", "swap_interval=0", "swap interval"),
    ("breather", "D2-BR", "swap_interval=inf", "swap interval"),
    ("breather", "D2-BR", "rating=0", "rating"),
    ("tech", "AK", "name=A\x1bK", "control character"),
]


@pytest.mark.parametrize(("table", "tag", "change", "word"), REGISTER_RANGES)
def test_register_values_get_a_range_message_not_damage(demo, capsys, table, tag, change, word):
    err = refused(capsys, demo, "register", "change", table, tag, change)
    assert word in err


def test_register_new_records_take_no_infinity(demo, capsys):
    refused(capsys, demo, "register", "filter", "X1", "--unit", "DCC-2", "--kind", "return",
            "--every", "inf")  # fmt: skip
    refused(capsys, demo, "register", "breather", "X2", "--unit", "DCC-2", "--every", "inf")
    refused(capsys, demo, "register", "fluid", "X3", "--nu40", "inf")
    refused(capsys, demo, "register", "tech", "=1+2")
    refused(capsys, demo, "register", "unit", "a b")


def test_clean_not_below_limit_and_limit_not_below_bypass_are_refused(demo, capsys):
    # D2-R in the demo: bypass 3.5 bar (invented plant)
    err = refused(capsys, demo, "register", "change", "filter", "D2-R", "limit=3.5")
    assert "below the bypass" in err
    err = refused(capsys, demo, "register", "change", "filter", "D2-R", "clean=5.0", "limit=5.0",
                  "bypass=6")  # fmt: skip
    assert "clean-element ΔP (5 bar) must be below the change limit (5 bar)" in err
    with open_book(demo) as book:
        with pytest.raises(BookError, match="clean-element ΔP"):
            register.update(
                book, FilterPosition, "D2-R", {"clean_bar": 5.0, "limit_bar": 5.0, "bypass_bar": 6}
            )
        with pytest.raises(BookError, match="bypass"):
            register.update(book, FilterPosition, "D2-R", {"limit_bar": 6.0})
        # both moved together in one change is fine (one statement: the schema sees both)
        register.update(book, FilterPosition, "D2-R", {"limit_bar": 5.0, "bypass_bar": 6.0})
        assert register.get(book, FilterPosition, "D2-R").limit_bar == 5.0


def test_negative_temperature_with_a_unit_after_a_space(demo, capsys):
    assert join_negative_values(["--temp", "-4F", "--json", "-x"]) == [
        "--temp=-4F",
        "--json",
        "-x",
    ]
    code, out, err = run(capsys, demo, "log", "reading", "D2-R", "--dp", "1", "--temp", "-4F")
    assert code == 0, err
    assert "-20 °C" in out  # -4 °F = -20 °C exactly (NIST SP 811: t/°C = (t/°F - 32)/1.8)


def test_an_inactive_technician_cannot_log(demo, capsys):
    err = refused(capsys, demo, "log", "note", "x", "--unit", "DCC-2", "--by", "FH")
    assert "inactive" in err


def test_dst_overlap_is_taken_and_said(demo, capsys):
    code, out, err = run(capsys, demo, "log", "note", "x", "--unit", "DCC-2", "--at",
                         "2026-10-25T02:30")  # fmt: skip
    assert code == 0
    assert "happens twice" in err and "UTC+02:00" in err


def test_unfiltered_top_up_with_a_rating_is_refused_not_dropped(demo):
    with pytest.raises(BookError, match="unfiltered top-up has no cart rating"):
        journal.topup_filtration(True, 10.0)
    assert journal.topup_filtration(True, None) is None
    assert journal.topup_filtration(False, 10.0) == 10.0
    with pytest.raises(BookError, match="cart's rating"):
        journal.topup_filtration(False, None)


def test_a_reading_over_the_bypass_is_saved_with_the_caution(demo, capsys):
    code, out, err = run(capsys, demo, "log", "reading", "D2-R", "--dp", "4.0")
    assert code == 0, err
    assert "CAUTION" in out and "unfiltered oil is passing" in out and "site procedures" in out
    with open_book(demo) as book:
        assert journal.read(book, filter="D2-R", newest_first=True, limit=1)[0].dp_bar == 4.0
        assert journal.reading_over_bypass(book, "D2-R", 3.0) is None
        assert journal.reading_over_bypass(book, "d2-r", 3.5)  # at the setting: open
        assert journal.reading_over_bypass(book, "D2-R", None, indicator="bypass")
    code, out, _ = run(capsys, demo, "log", "reading", "D2-R", "--dp", "1.0")
    assert "CAUTION" not in out


# ---- CSV import ---------------------------------------------------------------------------------

CSV_HEAD = "time,kind,target,by,dp_bar,filtered_um,volume_l,note\r\n"


@pytest.mark.parametrize(
    "row",
    [
        "0999-01-01T00:00Z,note,DCC-2,AK,,,,x",
        "1900-01-01T00:00Z,reading,D2-R,AK,1.0,,,",
        "2026-11-01T08:00,reading,D2-R,AK,inf,,,",
        "2026-11-01T08:00,reading,D2-R,AK,=1+1,,,",
        "2026-11-01T08:00,topup,DCC-2,AK,,nan,5,",
        "2026-11-01T08:00,note,DCC-2,AK,,,,\x1b[2Jx",
        '2026-11-01T08:00,note,DCC-2,AK,,,,"never closed',
    ],
)
def test_csv_import_refuses_what_no_one_could_type(demo, row):
    before = demo.read_bytes()
    with open_book(demo) as book:
        with pytest.raises(BookError, match="nothing imported"):
            import_csv(book, (CSV_HEAD + row + "\r\n").encode(), book.local_zone())
    assert demo.read_bytes() == before


def test_csv_quoted_cr_in_a_note_and_the_word_unfiltered(demo):
    data = (
        CSV_HEAD + '2026-11-01T08:00,note,DCC-2,AK,,,,"line one\rline two"\r\n'
        "2026-11-01T09:00,topup,DCC-2,AK,,unfiltered,5,\r\n"
    ).encode()
    with open_book(demo) as book:
        assert import_csv(book, data, book.local_zone()).added == 2
        since, until = (parse_time(t, book.local_zone(), allow_future=True)
                        for t in ("2026-11-01T07:59", "2026-11-01T09:01"))  # fmt: skip
        texts = {e.kind: e for e in journal.read(book, since=since, until=until, unit="DCC-2")}
        assert texts["note"].note == "line one\nline two"
        assert texts["topup"].filtered_um is None  # type: ignore[attr-defined]


# ---- merge --------------------------------------------------------------------------------------


def _v3_book(path: Path) -> sqlite3.Connection:
    """A logbook as sumpbook 3 made them: no CHECKs beyond schema 1's."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript("\n".join(MIGRATIONS[:3]))
    conn.execute("PRAGMA application_id = 1398099280")
    conn.execute("PRAGMA user_version = 3")
    return conn


def _crafted_snapshot(demo):
    """The demo's own contents plus rows no one could have typed."""
    with open_book(demo) as book:
        snap = _read(book.conn)
    good = {
        "id": "",
        "at_utc": "2026-11-20T08:00:00Z",
        "logged_utc": "2026-11-20T08:00:00Z",
        "kind": "note",
        "by": "AK",
        "unit": "DCC-2",
        "note": "x",
    }
    bad_entries = [
        {**good, "kind": "reading", "filter": "D2-R", "dp_bar": 1.0, "hours": "=1+1"},
        {**good, "kind": "reading", "filter": "D2-R", "dp_bar": math.inf},
        {**good, "note": "\x1b]0;owned\x07\x1b[2J"},
        {**good, "note": "x" * 5_000_000},
        {**good, "unit": "=1+2"},
        {**good, "unit": "a b"},
        {**good, "at_utc": "2026-02-30T10:00:00Z"},
        {**good, "at_utc": "2026-11-27 10:00:00"},
        {**good, "at_utc": "999-11-27T08:00:00Z"},
    ]
    for row in bad_entries:
        row["id"] = str(uuid.uuid4())
    fine = {**good, "id": str(uuid.uuid4()), "note": "a fine merged note"}
    snap.entries = snap.entries + bad_entries + [fine]
    snap.register["filters"] = snap.register["filters"] + [
        {**snap.register["filters"][0], "tag": "NEW-F", "reading_interval_h": 1e308},
        {**snap.register["filters"][0], "tag": "NEW-G", "limit_bar": 9.0, "bypass_bar": 3.0},
    ]
    snap.register["units"] = snap.register["units"] + [
        {**snap.register["units"][0], "tag": "=1+2"},
        {**snap.register["units"][0], "tag": "NEW-U", "name": "Press\x1b[2J"},
    ]
    snap.settings = {"timezone": "../../etc/passwd"}
    return snap, bad_entries, fine


def test_merge_holds_back_and_lists_every_row_no_one_could_type(demo, tmp_path):
    snap, bad, fine = _crafted_snapshot(demo)
    with open_book(demo) as book:
        report = MergeReport(other=tmp_path / "other.db")
        with book.atomic():
            _Merger(book, snap, report).run()
        ids = {r[0] for r in book.conn.execute("SELECT id FROM entries")}
        assert fine["id"] in ids
        assert not ids & {row["id"] for row in bad}
        tags = {
            r[0] for r in book.conn.execute("SELECT tag FROM filters UNION SELECT tag FROM units")
        }
        assert not tags & {"NEW-F", "NEW-G", "=1+2", "NEW-U"}
        assert book.setting("timezone") == "Europe/Vienna"
    text = "\n".join(report.conflicts)
    assert report.entries_left_out == len(bad)
    assert "values no one could have typed" in text
    assert "NEW-F not brought in" in text and "NEW-G not brought in" in text
    assert "\x1b" not in text
    # and the book still reads whole
    with open_book(demo) as book:
        from store.health import status_json

        assert journal.read(book)
        json.loads(
            json.dumps(status_json.to_json(views.watch(book), book.local_zone())),
            parse_constant=lambda c: pytest.fail(f"{c} in status JSON"),
        )


def test_merge_of_an_older_book_with_bad_rows_says_what_stayed_behind(demo, tmp_path):
    other = tmp_path / "old.db"
    conn = _v3_book(other)
    conn.execute("INSERT INTO technicians(tag) VALUES ('AK')")
    conn.execute("INSERT INTO units(tag) VALUES ('DCC-2')")
    for at, note in (("2026-11-20T08:00:00Z", "fine"), ("999-11-27T08:00:00Z", "old")):
        conn.execute(
            "INSERT INTO entries(id, at_utc, logged_utc, kind, by, unit, note) "
            "VALUES (?, ?, ?, 'note', 'AK', 'DCC-2', ?)",
            [str(uuid.uuid4()), at, "2026-11-20T08:00:00Z", note],
        )
    conn.close()
    with open_book(demo) as book:
        report = merge(book, other)
        assert report.entries_added == 1
    assert any("could not carry 1 row" in c for c in report.conflicts)


# ---- the schema as the last line ----------------------------------------------------------------


def _reading(book) -> str:
    entry = record.log(book, Reading(filter="P1-RF", dp_bar=2.4, by="AB"))
    return entry.id


def test_insert_or_replace_cannot_rewrite_history(book):
    entry_id = _reading(book)
    cursor = book.conn.execute("SELECT * FROM entries WHERE id = ?", [entry_id])
    row = dict(zip([d[0] for d in cursor.description], cursor.fetchone(), strict=True))
    row["dp_bar"] = 0.01
    names = ", ".join(row)
    marks = ", ".join("?" for _ in row)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        book.conn.execute(f"INSERT OR REPLACE INTO entries ({names}) VALUES ({marks})",
                          list(row.values()))  # fmt: skip
    assert journal.find_entry(book, entry_id).dp_bar == 2.4  # type: ignore[attr-defined]


@pytest.mark.parametrize(
    ("column", "value"),
    [
        ("dp_bar", math.inf),
        ("dp_bar", "=1+1"),
        ("hours", "=1+1"),
        ("temp_c", 1e308),
        ("at_utc", "999-11-27T08:00:00Z"),
        ("at_utc", "2026-02-30T10:00:00Z"),
        ("at_utc", "2026-11-27 10:00:00"),
        ("note", "\x1b[2J"),
        ("note", "\x9b2J"),
        ("note", "x" * 2001),
        ("unit", "=1+2"),
    ],
)
def test_a_hand_made_insert_cannot_plant_a_value_that_breaks_reading(book, column, value):
    row = {
        "id": str(uuid.uuid4()),
        "at_utc": "2026-11-20T08:00:00Z",
        "logged_utc": "2026-11-20T08:00:00Z",
        "kind": "reading",
        "by": "AB",
        "filter": "P1-RF",
        "unit": "P1",
        "dp_bar": 1.0,
        column: value,
    }
    with pytest.raises(sqlite3.IntegrityError):
        book.conn.execute(
            f"INSERT INTO entries ({', '.join(row)}) VALUES ({', '.join('?' for _ in row)})",
            list(row.values()),
        )


def test_register_rows_are_checked_by_the_file_too(book):
    for sql in (
        "UPDATE filters SET reading_interval_h = 1e999 WHERE tag = 'P1-RF'",
        "UPDATE filters SET limit_bar = 4.0 WHERE tag = 'P1-RF'",  # bypass 3.5
        "UPDATE units SET name = 'x' || char(27) WHERE tag = 'P1'",
        "INSERT INTO technicians(tag) VALUES ('a b')",
    ):
        with pytest.raises(sqlite3.IntegrityError):
            book.conn.execute(sql)


def test_an_older_book_is_carried_over_and_bad_rows_kept_aside(tmp_path):
    path = tmp_path / "old.db"
    conn = _v3_book(path)
    conn.execute("INSERT INTO technicians(tag) VALUES ('AB')")
    conn.execute("INSERT INTO units(tag) VALUES ('P1')")
    conn.execute("INSERT INTO filters(tag, unit, kind, reading_interval_h) "
                 "VALUES ('P1-RF', 'P1', 'return', 168)")  # fmt: skip
    rows = [
        ("2026-11-20T08:00:00Z", 1.5, "fine"),
        ("999-11-27T08:00:00Z", 1.5, "old year"),
        ("2026-11-20T09:00:00Z", "=1+1", "text as a number"),
        ("2026-11-20T10:00:00Z", 1e999, "infinite"),
    ]
    ids = []
    for at, dp, note in rows:
        ids.append(str(uuid.uuid4()))
        conn.execute(
            "INSERT INTO entries(id, at_utc, logged_utc, kind, by, filter, unit, dp_bar, note) "
            "VALUES (?, ?, '2026-11-20T08:00:00Z', 'reading', 'AB', 'P1-RF', 'P1', ?, ?)",
            [ids[-1], at, dp, note],
        )
    # a void of a row that stays behind stays behind too
    void_id = str(uuid.uuid4())
    conn.execute(
        "INSERT INTO entries(id, at_utc, logged_utc, kind, by, voids, note) "
        "VALUES (?, '2026-11-21T08:00:00Z', '2026-11-21T08:00:00Z', 'void', 'AB', ?, 'typo')",
        [void_id, ids[1]],
    )
    conn.close()
    with open_book(path) as book:
        assert book.notices and "could not carry 4 rows" in book.notices[0]
        assert [e.note for e in journal.read(book)] == ["fine"]
        kept = book.conn.execute("SELECT tbl, key, row FROM quarantine ORDER BY seq").fetchall()
        assert {k for _, k, _ in kept} == set(ids[1:]) | {void_id}
        assert json.loads(kept[0][2])["note"]
        assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert book.conn.execute("PRAGMA foreign_key_check").fetchall() == []
        record.log(book, Reading(filter="P1-RF", dp_bar=1.6, by="AB"))  # writes go on
    with open_book(path) as book:
        assert book.notices == []  # said once


# ---- reading never dies on one bad row -----------------------------------------------------------


def _plant_bad_row(path: Path) -> str:
    entry_id = "11111111-2222-4333-8444-555555555555"
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")  # as a hand-made edit could
    conn.execute(
        "INSERT INTO entries(id, at_utc, logged_utc, kind, by, unit, note) "
        "VALUES (?, '999-11-27T08:00:00Z', '2026-11-27T08:00:00Z', 'note', 'AK', 'DCC-2', 'x')",
        [entry_id],
    )
    conn.close()
    return entry_id


def test_a_bad_row_is_skipped_reported_and_can_be_voided(demo, capsys):
    entry_id = _plant_bad_row(demo)
    code, out, err = run(capsys, demo, "list", "entries", "--limit", "5")
    assert code == 0 and "could not be read" in err and entry_id[:8] in err
    code, out, err = run(capsys, demo, "status", "--json")
    assert code == 0
    json.loads(out, parse_constant=lambda c: pytest.fail(c))
    code, out, err = run(capsys, demo, "log", "void", entry_id, "--reason", "year typo")
    assert code == 0, err
    code, out, err = run(capsys, demo, "list", "entries", "--limit", "5")
    assert code == 0 and "could not be read" not in err


def test_an_export_skips_a_bad_row_and_says_which(demo, capsys, tmp_path):
    entry_id = _plant_bad_row(demo)
    out_csv = tmp_path / "all.csv"
    code, out, err = run(capsys, demo, "export", "--from", "2020-01-01T00:00", "-o", str(out_csv))
    assert code == 0, err
    assert "could not be read" in err and entry_id[:8] in err
    text = out_csv.read_text(encoding="utf-8-sig")
    assert entry_id not in text and text.count("\n") > 100  # the rest of the book is there


def test_notes_from_every_door_are_checked_the_same(book):
    for bad in ("\x1b[2J", "\x9b", "\x7f"):
        with pytest.raises(BookError, match="control character"):
            record.log(book, Note(unit="P1", note=f"x{bad}y", by="AB"))
    with pytest.raises(BookError, match="inactive"):
        register.update(book, Technician, "CD", {"active": False})
        record.log(book, Note(unit="P1", note="x", by="CD"))
    with pytest.raises(BookError, match="volume"):
        record.log(book, TopUp(unit="P1", volume_l=math.inf, by="AB"))


def test_status_json_never_prints_nan_or_infinity():
    from tui.cli.commands import strict_json

    data = {"a": [1.5, float("inf")], "b": {"c": float("nan")}, "d": "x"}
    assert json.loads(strict_json(data), parse_constant=lambda c: pytest.fail(c)) == {
        "a": [1.5, None],
        "b": {"c": None},
        "d": "x",
    }


def test_merge_holds_back_a_row_planted_past_the_other_books_checks(demo, tmp_path, capsys):
    other = tmp_path / "other.db"
    with open_book(demo) as book:  # a whole copy (the demo keeps its last writes in its WAL)
        book.conn.execute("VACUUM INTO ?", [str(other)])
    entry_id = _plant_bad_row(other)
    code, out, err = run(capsys, demo, "merge", str(other))
    assert code == 1, err  # a conflict for a person: the row is listed, not copied
    assert entry_id[:8] in out and "no one could have typed" in out
    with open_book(demo) as book:
        assert not book.conn.execute("SELECT 1 FROM entries WHERE id = ?", [entry_id]).fetchone()
