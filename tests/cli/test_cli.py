"""The `sumpbook` command line, end to end as a technician would type it."""

import json
import math
from datetime import datetime

import pytest

from tui.cli import main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def plant(tmp_path, capsys):
    """A small plant registered through the command line."""
    db = str(tmp_path / "cli.db")
    steps = [
        ["register", "tech", "AB", "--name", "A.B."],
        ["register", "fluid", "HV46", "--vg", "46", "--nu40", "46", "--nu100", "6.8"],
        [
            "register",
            "unit",
            "P1",
            "--fluid",
            "hv46",
            "--reservoir",
            "400",
            "--normal-temp",
            "50",
            "--target-code",
            "17/15/12",
        ],
        [
            "register",
            "filter",
            "P1-RF",
            "--unit",
            "p1",
            "--kind",
            "return",
            "--bypass",
            "3.5",
            "--limit",
            "2.5",
            "--clean",
            "0.4",
            "--flow",
            "120",
            "--rating",
            "10",
        ],
        ["register", "breather", "P1-BR", "--unit", "P1"],
        ["register", "shifts", "early=06:00", "late=14:00", "night=22:00"],
        ["prefs", "tech=ab"],
    ]
    for step in steps:
        code, _, err = run(capsys, "--db", db, *step)
        assert code == 0, err
    return db


def entries(db):
    import sqlite3

    return sqlite3.connect(db).execute("SELECT count(*) FROM entries").fetchone()[0]


def test_log_every_kind_and_list(plant, capsys):
    db = plant
    for step in [
        ["log", "reading", "P1-RF", "--dp", "18psi", "--temp", "113F", "--at", "2026-01-05T07:00"],
        ["log", "change", "P1-RF", "--reason", "limit", "--condition", "caked"],
        ["log", "topup", "P1", "--volume", "5gal", "--filtered", "3"],
        ["log", "breather", "P1-BR", "--condition", "2/3 spent"],
        ["log", "sample", "P1", "--counts", "3000/500/7", "--water", "150"],
        ["log", "note", "hose weeps", "--unit", "P1"],
    ]:
        code, out, err = run(capsys, "--db", db, *step)
        assert code == 0, err
        assert out.startswith("saved")
    code, out, _ = run(capsys, "--db", db, "list", "entries")
    assert code == 0
    # 18 psi = 1.241 bar (NIST SP 811 psi factor); 113 °F = 45 °C (SP 811 App. B)
    assert "1.24 bar" in out and "45 °C" in out
    # ISO 4406 worked example (REFERENCES.md §1c): 3000/500/7 per mL is 19/16/10
    assert "19/16/10" in out
    # 5 US gal = 18.93 L (SP 811: 1 gal = 3.785412 L)
    assert "18.9 L" in out
    assert entries(db) == 6


def test_the_saved_line_says_the_note_as_typed_back(plant, capsys):
    code, out, _ = run(capsys, "--db", plant, "log", "note", "hose weeps", "--unit", "P1")
    assert code == 0 and out.strip().endswith('by AB: "hose weeps"')
    code, out, err = run(
        capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1.1", "--note",
        "glass cracked\nreplace it",
    )  # fmt: skip
    assert code == 0, err
    # one line: the note's line break shown as a mark (control characters are refused)
    assert out.count("\n") == 1
    assert 'ΔP 1.10 bar; note "glass cracked␊replace it"' in out
    long = "weep at the fitting " * 30  # 600 characters
    code, out, _ = run(capsys, "--db", plant, "log", "note", long, "--unit", "P1")
    said = out.split(": ", 1)[1].strip()
    assert code == 0 and len(said) == 202 and said.endswith('…"')  # 200 and the quotes


def test_a_typed_minus_zero_is_saved_and_shown_as_zero(plant, capsys):
    # IEEE 754-2008 §6.3: in round-to-nearest, -0 + +0 is +0; a gauge never reads "-0.00"
    code, out, err = run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "-0")
    assert code == 0, err
    assert "ΔP 0.00 bar" in out and "-0" not in out.split("ΔP", 1)[1]
    import sqlite3

    kept = (
        sqlite3.connect(plant)
        .execute("SELECT dp_bar FROM entries WHERE kind = 'reading' ORDER BY rowid DESC LIMIT 1")
        .fetchone()[0]
    )
    assert kept == 0 and math.copysign(1.0, kept) == 1.0


def test_a_top_up_on_the_command_line_ends_with_its_caution(plant, capsys):
    # common practice, no source: an opened reservoir may be pressurised and hot
    code, out, _ = run(capsys, "--db", plant, "log", "topup", "P1", "--volume", "5",
                       "--filtered", "3")  # fmt: skip
    assert code == 0
    assert out.splitlines()[-1].startswith("Safety: vent a pressurised reservoir")


def test_void_through_the_cli(plant, capsys):
    _, out, _ = run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "9")
    entry_id = out.split()[2]
    code, out, _ = run(capsys, "--db", plant, "log", "void", entry_id, "--reason", "typo")
    assert code == 0
    code, _, err = run(capsys, "--db", plant, "log", "void", entry_id, "--reason", "again")
    assert code != 0 and "voided already" in err
    _, out, _ = run(capsys, "--db", plant, "list", "entries")
    assert "(void)" in out


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["log", "reading", "P1-RX", "--dp", "1"], "did you mean P1-RF"),
        (["log", "reading", "P1-RF", "--dp", "-1"], "outside"),
        (["log", "reading", "P1-RF", "--dp", "150"], "outside"),
        (["log", "reading", "P1-RF", "--dp", "1", "--temp", "200"], "outside"),
        (["log", "reading", "P1-RF", "--dp", "1", "--temp", "-45"], "outside"),
        (["log", "reading", "P1-RF", "--dp", "1 furlong"], "unknown pressure unit"),
        (["log", "reading", "P1-RF", "--dp", "1", "--at", "yesterday-ish"], "ISO 8601"),
        (["log", "reading", "P1-RF", "--dp", "1", "--at", "2099-01-01T00:00"], "ahead"),
        (["log", "reading", "P1-RF"], "--dp"),
        (["log", "void", "abcdef12", "--reason", "x"], "no entry"),
        (["log", "topup", "P9", "--volume", "5", "--unfiltered"], "unknown unit"),
        (["log", "reading", "P1-RF", "--dp", "1", "--by", "QQ"], "unknown technician"),
        # issue 23: a decimal comma with three digits reads two ways: asked, never guessed
        (["log", "reading", "P1-RF", "--dp", "1,250"], "1.25 or 1250?"),
        (["log", "reading", "P1-RF", "--dp", "1", "--flow", "1,250"], "1.25 or 1250?"),
        (["log", "reading", "P1-RF", "--dp", "1", "--hours", "2,500"], "2.5 or 2500?"),
        # issue 24: the mistyped tag is named with its suggestion, not only the technician
        (["log", "reading", "P1RF", "--dp", "1", "--by", "QQ"], "did you mean P1-RF"),
        # issue 24: not "unknown pressure unit '.3'"
        (["log", "reading", "P1-RF", "--dp", "1..3"], "'1..3' is not a number"),
    ],
)
def test_bad_input_is_one_line_nonzero_and_writes_nothing(plant, capsys, argv, message):
    code, _, err = run(capsys, "--db", plant, *argv)
    assert code == 2
    assert message in err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert entries(plant) == 0


def test_a_file_that_is_not_a_logbook(tmp_path, capsys):
    path = tmp_path / "junk.db"
    path.write_bytes(b"junk" * 1000)
    code, _, err = run(capsys, "--db", str(path), "list", "units")
    assert code == 2 and "not a sumpbook logbook" in err
    assert path.read_bytes() == b"junk" * 1000


def test_no_logbook_yet_is_said_plainly(tmp_path, capsys):
    code, _, err = run(capsys, "--db", str(tmp_path / "none.db"), "list", "entries")
    assert code == 2 and "no logbook" in err
    assert not (tmp_path / "none.db").exists()


def test_export_import_round_trip(plant, tmp_path, capsys):
    for step in [
        [
            "log",
            "reading",
            "P1-RF",
            "--dp",
            "1.2",
            "--temp",
            "40",
            "--note",
            "=1+1 looks like a formula",
        ],
        ["log", "topup", "P1", "--volume", "20", "--unfiltered"],
        ["log", "sample", "P1", "--code", "18/16/13"],
    ]:
        assert run(capsys, "--db", plant, *step)[0] == 0
    out_csv = tmp_path / "shift.csv"
    code, _, err = run(capsys, "--db", plant, "export", "--from", "2000-01-01", "-o", str(out_csv))
    assert code == 0, err
    text = out_csv.read_text(encoding="utf-8")
    header = text.splitlines()[0].split(",")
    assert {"dp_bar", "temp_c", "dp_ref_bar", "reference", "volume_l"} <= set(header)
    assert "'=1+1" in text  # neutralised for spreadsheets

    other = str(tmp_path / "other.db")
    import shutil

    shutil.copy(plant, other)  # same register...
    import sqlite3

    conn = sqlite3.connect(other)
    conn.execute("DROP TRIGGER entries_no_delete")  # ...but no entries (test set-up only)
    conn.execute("DELETE FROM entries")
    conn.commit()
    conn.close()
    code, out, err = run(capsys, "--db", other, "import", str(out_csv))
    assert code == 0, err
    assert "imported 3" in out
    a = (
        sqlite3.connect(plant)
        .execute(
            "SELECT id, kind, dp_bar, temp_c, volume_l, code, note, "
            "filtered_um FROM entries ORDER BY id"
        )
        .fetchall()
    )
    b = (
        sqlite3.connect(other)
        .execute(
            "SELECT id, kind, dp_bar, temp_c, volume_l, code, note, "
            "filtered_um FROM entries ORDER BY id"
        )
        .fetchall()
    )
    assert a == b
    code, out, _ = run(capsys, "--db", other, "import", str(out_csv))
    assert code == 0 and "imported 0" in out and "3 were in the book already" in out


def test_import_minimal_columns_and_all_or_nothing(plant, tmp_path, capsys):
    good = tmp_path / "good.csv"
    good.write_text(
        "time,kind,target,dp,dp_unit,temp,temp_unit,by,note\n"
        "2026-01-05T07:00,reading,P1-RF,18,psi,113,F,AB,first\n"
        "2026-01-05T15:00,reading,p1-rf,1.3,bar,50,C,ab,\n",
        encoding="utf-8",
    )
    code, out, err = run(capsys, "--db", plant, "import", str(good))
    assert code == 0, err
    assert entries(plant) == 2
    bad = tmp_path / "bad.csv"
    bad.write_text(
        "time,kind,target,dp,dp_unit,temp,temp_unit,by,note\n"
        "2026-01-06T07:00,reading,P1-RF,1.0,bar,40,C,AB,fine\n"
        "2026-01-06T08:00,reading,P1-XX,1.0,bar,40,C,AB,unknown tag\n"
        "2026-01-06T09:00,reading,P1-RF,-3,bar,40,C,AB,negative\n"
        "not a time,reading,P1-RF,1.0,bar,40,C,AB,bad time\n",
        encoding="utf-8",
    )
    code, _, err = run(capsys, "--db", plant, "import", str(bad))
    assert code == 2
    assert "line 3" in err and "line 4" in err and "line 5" in err and "line 2" not in err
    assert entries(plant) == 2


def test_export_shift_choices(plant, capsys):
    run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1.0")
    code, out, _ = run(capsys, "--db", plant, "export", "--shift", "current", "--entries-only")
    assert code == 0 and len(out.strip().splitlines()) == 2
    code, out, _ = run(capsys, "--db", plant, "export", "--shift", "previous", "--entries-only")
    assert code == 0 and len(out.strip().splitlines()) == 1
    # without --entries-only the reading's filter follows as a status row (its next reading)
    code, out, _ = run(capsys, "--db", plant, "export", "--shift", "current")
    assert code == 0 and [line.split(",")[3:5] for line in out.splitlines()[2:]] == [
        ["status", "P1-RF"]
    ]
    code, _, err = run(capsys, "--db", plant, "export", "--shift", "2026-01-05/lunch")
    assert code == 2 and "no shift named" in err


def test_register_change_is_logged(plant, capsys):
    code, out, err = run(
        capsys, "--db", plant, "register", "change", "filter", "P1-RF", "limit=2.4"
    )
    assert code == 0, err
    import sqlite3

    rows = (
        sqlite3.connect(plant)
        .execute("SELECT field, old, new, by FROM register_log WHERE field = 'limit_bar'")
        .fetchall()
    )
    assert rows == [("limit_bar", "2.5", "2.4", "AB")]
    code, _, err = run(capsys, "--db", plant, "register", "change", "filter", "P1-RF", "limit=9")
    assert code == 2 and "below the bypass" in err


def test_status_json_has_the_documented_fields(plant, capsys):
    for hour, dp in ((7, "0.6"), (8, "0.7"), (9, "0.8")):  # three minutes apart at least
        at = f"2026-01-05T0{hour}:00"
        run(
            capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", dp, "--temp", "50", "--at", at
        )
    code, out, err = run(capsys, "--db", plant, "status", "--json")
    assert code == 0, err
    data = json.loads(out)
    assert set(data) >= {"filters", "breathers", "units"}
    f = data["filters"][0]
    for key in (
        "filter",
        "unit",
        "kind",
        "dp_ref_bar",
        "limit_bar",
        "bypass_bar",
        "percent_of_limit",
        "due",
        "bypass_due",
        "basis",
        "state",
        "flags",
        "readings_since_change",
        "cold_start",
        "reference",
    ):
        assert key in f
    assert f["filter"] == "P1-RF" and f["readings_since_change"] == 3
    # at the reference temperature the normalised value is the reading itself
    assert f["dp_ref_bar"] == pytest.approx(0.8)
    assert f["basis"] in ("earlier-curves", "trend", "service-life", "interval", "none")


def test_sample_line_says_whether_it_meets_the_target(plant, capsys):
    # ISO 4406 table (REFERENCES.md §1c): 2000/500/60 per mL is 18/16/13, one step over
    # 17/15/12 at every size
    code, out, _ = run(capsys, "--db", plant, "log", "sample", "P1", "--counts", "2000/500/60")
    assert code == 0
    assert "18/16/13" in out and "+1" in out and "17/15/12" in out


def test_demo_refuses_to_overwrite_without_force(tmp_path, capsys):
    db = str(tmp_path / "plant.db")
    code, out, err = run(capsys, "--db", db, "demo")
    assert code == 0, err
    assert "entries" in out
    code, _, err = run(capsys, "--db", db, "demo")
    assert code == 2 and "--force" in err
    code, _, err = run(capsys, "--db", db, "demo", "--force")
    assert code == 0, err
    code, out, _ = run(capsys, "--db", db, "status", "--json")
    assert code == 0 and json.loads(out)["filters"]


def test_register_history_on_the_command_line(plant, capsys):
    code, _, err = run(capsys, "--db", plant, "register", "change", "filter", "P1-RF", "limit=2.4")
    assert code == 0, err
    code, out, err = run(capsys, "--db", plant, "register", "history", "p1-rf")
    assert code == 0, err
    lines = [line for line in out.splitlines() if "P1-RF" in line and "│" in line]
    assert len(lines) == 2  # added, then the limit changed
    assert "(new record)" in lines[0] and "added" in lines[0]
    assert "limit_bar" in lines[1] and "2.5 → 2.4" in lines[1] and "AB" in lines[1]
    code, out, _ = run(capsys, "--db", plant, "register", "history", "--limit", "1")
    assert code == 0 and "2.5 → 2.4" in out and "(1)" in out
    code, _, err = run(capsys, "--db", plant, "register", "history", "P9-XX")
    assert code == 2 and "P9-XX" in err


def _likely(capsys, db, tag):
    code, out, _ = run(capsys, "--db", db, "status", "--json")
    assert code == 0
    f = next(f for f in json.loads(out)["filters"] if f["filter"] == tag)
    return datetime.fromisoformat(f["due"]["likely"]), f


def test_a_reading_without_the_hour_meter_keeps_the_demo_due_date(tmp_path, capsys):
    # issue 11: on the demo plant (frozen clock), M1-P's likely date is 18 Dec; a reading
    # logged without --hours moved it to 18 Jan (its ages fell back to calendar hours)
    db = str(tmp_path / "demo.db")
    assert run(capsys, "--db", db, "demo")[0] == 0
    before, f0 = _likely(capsys, db, "M1-P")
    assert (before.month, before.day) == (12, 18)
    code, _, err = run(capsys, "--db", db, "log", "reading", "M1-P", "--dp", "3.2", "--temp",
                       "48", "--by", "BM")  # fmt: skip
    assert code == 0, err
    after, f1 = _likely(capsys, db, "M1-P")
    assert (after.month, after.day) == (12, 18)
    assert f1["basis"] == "earlier-curves" and "earlier elements" in " ".join(f1["notes"])
    # the element's age is the meter estimate at the running rate, not frozen at a reading
    assert f1["element_age_h"] == pytest.approx(f0["element_age_h"], abs=0.05)


def test_a_fixed_clock_that_is_not_a_time_gets_one_line_and_nothing_is_read(monkeypatch, capsys):
    from tui.cli import main

    monkeypatch.setenv("SUMPBOOK_NOW", "garbage")
    assert main(["status"]) == 2
    err = capsys.readouterr().err
    assert (
        err.startswith("sumpbook: SUMPBOOK_NOW='garbage' is not a time") and "Traceback" not in err
    )


def test_the_cli_reads_a_decimal_comma_in_every_number_as_the_forms_do(plant, capsys):
    # issue 23: `--flow 12,5` was refused while `--dp 1,4` was accepted
    code, out, err = run(
        capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1,4", "--flow", "12,5"
    )
    assert code == 0, err
    assert "ΔP 1.40 bar" in out and "12.5 L/min" in out
    code, out, err = run(capsys, "--db", plant, "log", "sample", "P1", "--water", "0,250")
    assert code == 0, err  # a leading 0 reads one way only: 0.25


def test_register_on_a_path_with_no_logbook_says_it_made_a_new_one(tmp_path, capsys):
    # issue 23: a mistyped --db silently became a second logbook
    db = tmp_path / "typo.db"
    code, out, err = run(capsys, "--db", str(db), "register", "tech", "AB")
    assert code == 0 and db.exists()
    assert "no logbook at" in err and "new, empty one was created" in err
    code, out, err = run(capsys, "--db", str(db), "register", "tech", "CD")
    assert code == 0 and "no logbook" not in err  # said once, when it happened


def test_a_reading_nobody_made_is_refused_with_the_reason_unless_as_read(plant, capsys):
    # issue 24: 24 bar on a 3.5 bar bypass is a slipped decimal point far likelier than a reading
    code, _, err = run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "24")
    assert code == 2 and "7 times the bypass setting" in err and "(2.4 bar)?" in err
    assert entries(plant) == 0
    # two readings on one filter in one minute: the second is asked about
    at = ("--at", "2026-01-05T07:00")
    assert run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1.1", *at)[0] == 0
    code, _, err = run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1.2", *at)
    assert code == 2 and "a reading in this minute already" in err and "--as-read" in err
    assert entries(plant) == 1
    # a value refused outright is said as such, not asked about as a second reading
    code, _, err = run(capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "-1", *at)
    assert code == 2 and "outside its range" in err and "this minute" not in err
    assert entries(plant) == 1
    code, _, err = run(
        capsys, "--db", plant, "log", "reading", "P1-RF", "--dp", "1.2", *at, "--as-read"
    )
    assert code == 0, err
    assert entries(plant) == 2


def test_export_to_an_existing_file_asks_first(plant, tmp_path, capsys):
    # issue 24: `export -o` overwrote an existing file without a word
    target = tmp_path / "handover.csv"
    target.write_text("yesterday's notes\n")
    code, _, err = run(capsys, "--db", plant, "export", "--from", "2000-01-01", "-o", str(target))
    assert code == 2 and "add --force" in err
    assert target.read_text() == "yesterday's notes\n"  # untouched
    code, _, err = run(
        capsys, "--db", plant, "export", "--from", "2000-01-01", "-o", str(target), "--force"
    )
    assert code == 0, err
    assert target.read_text(encoding="utf-8-sig").startswith("id,")
