"""The shift-log CSV as an office spreadsheet opens it, and what export may write over.

A file export starts with UTF-8's byte-order mark (the Unicode Standard, 3.10 D94: EF BB BF),
so that a spreadsheet reads ν, °C, µm as written; an ISO 4406 code is written as a text
formula so it is not taken for a date; an unfiltered top-up says so; the reference column
follows the user's temperature unit. Import reads both these files and older ones (no BOM,
empty filtered_um, plain codes).
"""

from __future__ import annotations

import csv
import io
import os
import shutil
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.session import fixed_clock
from store.base.timeutil import zone
from store.db.book import open_book
from store.exchange.csvexport import export_file, write_span
from store.exchange.csvio import import_csv
from store.ledger import journal
from store.ledger.entries import Reading, Sample, TopUp
from tests.kit.plant import fill_register

UTC_ZONE = zone("UTC")
BOM = b"\xef\xbb\xbf"  # UTF-8's byte-order mark (Unicode Standard, D94)
REPO = Path(__file__).resolve().parents[2]
NOW = "2026-06-01T12:00:00Z"


@pytest.fixture
def logged(book, monkeypatch):
    book.clock = fixed_clock(NOW)
    record.log(book, Reading(filter="P1-RF", dp_bar=1.2, temp_c=40, by="AB", note="ν high"))
    record.log(book, TopUp(unit="P1", volume_l=20, by="AB"))  # unfiltered
    record.log(book, TopUp(unit="P1", volume_l=5, filtered_um=3, by="AB"))
    record.log(book, Sample(unit="P1", code="14/12/9", by="AB"))
    record.log(book, Sample(unit="P1", code="-/16/13", by="AB"))
    return book


def export(book, prefs: Prefs | None = None, dest: Path | None = None) -> bytes:
    dest = dest or book.path.with_name("out.csv")
    export_file(book, dest, None, None, prefs or Prefs(), UTC_ZONE, book.shift_pattern())
    return dest.read_bytes()


def rows_of(data: bytes) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(data.decode("utf-8-sig"), newline="")))


def fresh_twin(book, tmp_path) -> Path:
    """A book with the same register and no entries."""
    twin = tmp_path / "twin.db"
    with open_book(twin) as other:
        fill_register(other)
    return twin


def test_a_file_export_starts_with_the_bom_and_keeps_greek_and_degree_signs(logged):
    data = export(logged)
    assert data.startswith(BOM) and not data.startswith(BOM * 2)
    text = data[len(BOM) :].decode("utf-8")
    assert "ν high" in text and "mm²/s" in text and "°C" in text


def test_the_command_line_writes_the_bom_to_files_and_on_request_to_stdout(
    logged, tmp_path, capsysbinary
):
    from tui.cli import main

    out = tmp_path / "cli.csv"
    base = ["--db", str(logged.path), "export", "--from", "2000-01-01"]
    assert main([*base, "-o", str(out)]) == 0
    assert out.read_bytes().startswith(BOM)
    assert main([*base, "-o", str(out), "--no-bom", "--force"]) == 0  # over the first
    assert out.read_bytes().startswith(b"id,time,")
    capsysbinary.readouterr()
    assert main(base) == 0  # stdout feeds programs: no BOM unless asked for
    assert capsysbinary.readouterr().out.startswith(b"id,time,")
    assert main([*base, "--bom"]) == 0
    assert capsysbinary.readouterr().out.startswith(BOM + b"id,time,")


def test_iso_codes_are_text_formulas_and_unfiltered_top_ups_say_so(logged):
    rows = rows_of(export(logged))
    codes = [r["code"] for r in rows if r["kind"] == "sample"]
    # a spreadsheet shows ="14/12/9" as the text 14/12/9, never as a date
    assert codes == ['="14/12/9"', '="-/16/13"']
    tops = [r["filtered_um"] for r in rows if r["kind"] == "topup"]
    assert tops == ["unfiltered", "3"]
    assert all(r["filtered_um"] == "" for r in rows if r["kind"] != "topup")


def test_the_round_trip_gives_back_codes_and_unfiltered_top_ups(logged, tmp_path):
    data = export(logged)
    twin = fresh_twin(logged, tmp_path)
    with open_book(twin) as other:
        result = import_csv(other, data, UTC_ZONE)
        assert result.added == 5
        back = {e.id: e for e in journal.read(other)}
    for entry in journal.read(logged):
        got = back[entry.id]
        assert (got.kind, getattr(got, "code", None)) == (entry.kind, getattr(entry, "code", None))
        assert getattr(got, "filtered_um", None) == getattr(entry, "filtered_um", None)


def test_an_older_file_without_bom_or_unfiltered_word_still_imports(logged, tmp_path):
    twin = fresh_twin(logged, tmp_path)
    old = (
        "id,time,kind,target,by,volume_l,filtered_um,code,note\r\n"
        f"{uuid.uuid4()},2026-05-30T08:00:00+00:00,topup,P1,AB,12,,,old file\r\n"
        f"{uuid.uuid4()},2026-05-30T09:00:00+00:00,sample,P1,AB,,,18/16/13,old file\r\n"
    ).encode()
    with open_book(twin) as other:
        assert import_csv(other, old, UTC_ZONE).added == 2
        top, sample = journal.read(other)
    assert top.filtered_um is None and top.volume_l == 12
    assert sample.code == "18/16/13"


def test_a_code_formula_that_is_not_a_code_is_not_taken_apart(book, tmp_path):
    bad = (
        b"time,kind,target,by,code\r\n"
        b'2026-05-30T09:00:00+00:00,sample,P1,AB,"=HYPERLINK(""x"")"\r\n'
    )
    with pytest.raises(BookError, match="line 2"):
        import_csv(book, bad, UTC_ZONE)
    assert journal.count(book) == 0


def test_the_reference_follows_the_temperature_unit(logged):
    # P1 runs at 50 °C normally: 50 °C = 122 °F (°F = 1.8 °C + 32, NIST SP 811 B.9)
    rows = rows_of(export(logged, Prefs(pressure="bar", temperature="F", volume="L")))
    reading = next(r for r in rows if r["kind"] == "reading")
    assert reading["temp_f"] == "104"  # 40 °C (NIST SP 811 B.9)
    assert "(122 °F)" in reading["reference"] and "°C" not in reading["reference"]
    rows = rows_of(export(logged, Prefs()))
    assert "(50 °C)" in next(r for r in rows if r["kind"] == "reading")["reference"]


# ---- what export writes over -----------------------------------------------------------------


def test_a_symlink_a_fifo_and_a_folder_are_refused_and_left_as_they_are(logged, tmp_path):
    target = tmp_path / "precious.txt"
    target.write_text("keep me")
    link = tmp_path / "link.csv"
    link.symlink_to(target)
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    for dest, word in ((link, "symbolic link"), (fifo, "pipe"), (folder, "folder")):
        with pytest.raises(BookError, match=word) as refused:
            export(logged, dest=dest)
        assert "\n" not in str(refused.value)
        assert not dest.with_name(dest.name + ".part").exists()
    assert link.is_symlink() and target.read_text() == "keep me"
    assert fifo.is_fifo() and folder.is_dir()


def test_a_device_is_refused(logged):
    if not Path("/dev/null").exists():
        pytest.skip("no /dev/null here")
    with pytest.raises(BookError, match="device"):
        export_file(logged, Path("/dev/null"), None, None, Prefs(), UTC_ZONE, [])


def test_a_symlink_planted_as_the_part_file_is_not_followed(logged, tmp_path):
    target = tmp_path / "precious.txt"
    target.write_text("keep me")
    (tmp_path / "out.csv.part").symlink_to(target)
    with pytest.raises(BookError, match="symbolic link"):
        export(logged, dest=tmp_path / "out.csv")
    assert target.read_text() == "keep me"


def test_a_failed_export_leaves_no_part_and_the_old_file(logged, tmp_path, monkeypatch):
    dest = tmp_path / "out.csv"
    dest.write_text("yesterday's file")

    def full_disk(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr("store.exchange.csvexport.write_span", full_disk)
    with pytest.raises(BookError, match="No space left"):
        export(logged, dest=dest)
    assert dest.read_text() == "yesterday's file"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith("out")) == ["out.csv"]


def test_a_stale_part_of_a_killed_export_is_replaced(logged, tmp_path):
    (tmp_path / "out.csv.part").write_text("half a file from a killed export")
    data = export(logged, dest=tmp_path / "out.csv")
    assert data.startswith(BOM) and b"killed" not in data
    assert not (tmp_path / "out.csv.part").exists()


def big_book(path: Path, count: int) -> None:
    """A book holding `count` readings, written straight into the table (set-up only)."""
    with open_book(path) as book:
        fill_register(book)
        stamps = [f"2026-{1 + i // 40000:02d}-01T00:00:00Z" for i in range(count)]
        with book.atomic():
            book.conn.executemany(
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, filter, dp_bar, "
                "temp_c) VALUES (?, ?, ?, 'reading', 'AB', 'P1', 'P1-RF', ?, 40)",
                [(str(uuid.uuid4()), s, s, 1 + (i % 97) / 100) for i, s in enumerate(stamps)],
            )


def test_a_killed_export_leaves_no_process_and_at_most_its_part(tmp_path):
    path = tmp_path / "big.db"
    big_book(path, 80_000)
    temp = tmp_path / "tmp"
    temp.mkdir()
    dest = tmp_path / "out" / "year.csv"
    dest.parent.mkdir()
    env = {**os.environ, "TMPDIR": str(temp), "SUMPBOOK_NOW": NOW}
    args = [sys.executable, "-m", "tui", "--db", str(path), "export", "--from", "2000-01-01"]
    args.append("--entries-only")  # the entries alone: one line each
    child = subprocess.Popen(
        [*args, "-o", str(dest)],
        cwd=REPO,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    part = dest.with_name("year.csv.part")
    deadline = time.monotonic() + 120
    while not (part.exists() and part.stat().st_size > 0) and child.poll() is None:
        assert time.monotonic() < deadline
        time.sleep(0.002)
    child.send_signal(signal.SIGKILL)
    child.wait(timeout=30)
    with pytest.raises(ProcessLookupError):  # nothing of its session is left running
        os.killpg(child.pid, 0)
    assert {p.name for p in dest.parent.iterdir()} <= {"year.csv.part"}
    assert list(temp.iterdir()) == []  # no temporary file anywhere
    # the next export replaces the stale part and writes the whole file
    done = subprocess.run([*args, "-o", str(dest)], cwd=REPO, env=env, capture_output=True)
    assert done.returncode == 0, done.stderr
    assert [p.name for p in dest.parent.iterdir()] == ["year.csv"]
    assert dest.read_bytes().count(b"\r\n") == 80_001
    shutil.rmtree(temp)


def test_write_span_is_the_whole_file_without_the_bom(logged):
    out = io.StringIO()
    write_span(out, logged, None, None, Prefs(), UTC_ZONE, logged.shift_pattern())
    assert export(logged) == BOM + out.getvalue().encode("utf-8")
