"""Hostile input: CSV import and export fuzzed with hypothesis, and SQL injection tried
through every text field.

Import is all or nothing with line-numbered errors and never crashes on any bytes. Export
neutralises cells a spreadsheet would run as formulas (leading =, +, -, @, tab, CR: the
OWASP "CSV Injection" list) and import restores them. No SQL is built from text.
"""

from __future__ import annotations

import csv
import io
import re
import shutil
import sqlite3
import tempfile
import uuid
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from store import record
from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.timeutil import zone
from store.db.book import open_book
from store.exchange.csvcolumns import COLUMNS, FORMULA_START, neutralise, restore
from store.exchange.csvexport import write_span
from store.exchange.csvio import MAX_FIELD_CHARS, import_csv
from store.ledger import journal, register
from store.ledger.entries import BreatherSwap, ElementChange, Note, Reading, Sample, TopUp, Void
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit
from tests.kit.plant import fill_register

UTC_ZONE = zone("UTC")
HEADER = "id,time,kind,target,by,dp_bar,temp_c,reason,condition,batch,code,note\n"
SPREADSHEET_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")  # OWASP CSV Injection
FUZZ = settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


@pytest.fixture(scope="module")
def template(tmp_path_factory) -> Path:
    """A closed logbook holding the test plant's register and no entries."""
    path = tmp_path_factory.mktemp("template") / "plant.db"
    with open_book(path) as book:
        fill_register(book)
    return path


class Fresh:
    """A private copy of the template for one hypothesis example."""

    def __init__(self, template: Path) -> None:
        self.folder = Path(tempfile.mkdtemp(prefix="sumpbook-csv-"))
        self.path = self.folder / "plant.db"
        shutil.copy(template, self.path)
        self.book = open_book(self.path)
        self.book.conn.execute("PRAGMA synchronous = OFF")  # test speed only

    def __enter__(self):
        return self.book

    def __exit__(self, *exc: object) -> None:
        self.book.close()
        shutil.rmtree(self.folder, ignore_errors=True)


def _count(book) -> int:
    return book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def _schema(book) -> list[tuple]:
    return book.conn.execute("SELECT type, name, sql FROM sqlite_master ORDER BY name").fetchall()


def _line_numbers(message: str) -> list[int]:
    return [int(n) for n in re.findall(r"line (\d+):", message)]


# ---- import: any bytes at all ----------------------------------------------------------------

row_cells = st.one_of(
    st.text(max_size=30),
    st.sampled_from(["=1+1", "+SUM(A1)", "-2+3", "@cmd", "\tx", "\rx", "'=x", "''", '"', ","]),
    st.sampled_from(["2026-01-05T07:00Z", "reading", "note", "P1-RF", "P1", "AB", "0.8", "nan"]),
    st.builds(
        lambda n, ch: ch * n,
        st.integers(MAX_FIELD_CHARS - 2, MAX_FIELD_CHARS + 2),
        st.sampled_from("a="),
    ),
)


@st.composite
def csv_like(draw) -> bytes:
    """Bytes that are anything from noise to almost-valid shift logs in odd encodings."""
    choice = draw(st.integers(0, 3))
    if choice == 0:
        return draw(st.binary(max_size=3000))
    rows = draw(st.lists(st.lists(row_cells, min_size=1, max_size=14), max_size=6))
    out = io.StringIO()
    csv.writer(out).writerows(rows)
    text = HEADER + out.getvalue()
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "cp1252", "latin-1"]))
    data = text.encode(encoding, errors="replace")
    if choice == 3:  # damage it: cut, splice noise
        cut = draw(st.integers(0, len(data)))
        data = data[:cut] + draw(st.binary(max_size=40)) + data[cut:]
    return data


@FUZZ
@given(data=csv_like())
def test_any_bytes_import_whole_or_not_at_all(template, data):
    with Fresh(template) as book:
        before = _schema(book)
        try:
            result = import_csv(book, data, UTC_ZONE)
        except BookError as exc:
            message = str(exc)
            assert "\n" not in message and "\r" not in message
            assert _count(book) == 0  # nothing from a refused file
            lines = data.count(b"\n") + data.count(b"\r") + 1  # CR, LF or CRLF end a line
            assert all(1 <= n <= lines for n in _line_numbers(message)), message
        else:
            assert _count(book) == result.added
        assert _schema(book) == before
        assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


@FUZZ
@given(
    good=st.integers(1, 12),
    bad_at=st.data(),
    bad=st.sampled_from(
        [
            ("2026-01-05T07:00Z", "reading", "NO-SUCH", "AB", "0.5"),  # unknown tag
            ("2026-01-05T07:00Z", "reading", "P1-RF", "AB", "-1"),  # negative ΔP
            ("yesterday", "reading", "P1-RF", "AB", "0.5"),  # not a time
            ("2026-01-05T07:00Z", "reading", "P1-RF", "ZZ", "0.5"),  # unknown technician
            ("2026-01-05T07:00Z", "teleport", "P1-RF", "AB", "0.5"),  # unknown kind
            ("2026-01-05T07:00Z", "reading", "P1-RF", "AB", "=HYPERLINK(1)"),  # not a number
        ]
    ),
)
def test_one_bad_row_rejects_the_file_and_names_its_line(template, good, bad_at, bad):
    rows = [("2026-01-05T07:00Z", "reading", "P1-RF", "AB", f"0.{i + 1}") for i in range(good)]
    position = bad_at.draw(st.integers(0, good))
    rows.insert(position, bad)
    text = "time,kind,target,by,dp_bar\n" + "".join(",".join(r) + "\n" for r in rows)
    with Fresh(template) as book:
        with pytest.raises(BookError) as refused:
            import_csv(book, text.encode(), UTC_ZONE)
        assert _line_numbers(str(refused.value)) == [position + 2]  # +1 header, +1 from one
        assert str(refused.value).startswith("nothing imported")
        assert _count(book) == 0


@pytest.mark.parametrize(
    ("data", "message"),
    [
        (
            (HEADER + ",2026-01-05T07:00Z,note,P1,AB,,,,,,,Température 50 °C\n").encode("cp1252"),
            r"line 2: the file is not UTF-8",
        ),
        (b"time,kind,by\n2026-01-05T07:00Z,note,AB\x00\n", r"line 2: .*NUL"),
        (
            (HEADER + ",2026-01-05T07:00Z,note,P1,AB,,,,,,,%s\n" % ("n" * 20_000)).encode(),
            rf"line 2: a cell is longer than {MAX_FIELD_CHARS}",
        ),
        (
            (HEADER + ",2026-01-05T07:00Z,note,P1,AB,,,,,,,%s\n" % ("n" * 3000)).encode(),
            r"line 2: note is longer than 2000",
        ),
        (b"time,kind,by,time\n", r"line 1: the header repeats the column\(s\) time"),
        (b"time,kind,by,dp_mbar\n", r"line 1: unknown column"),
        (b"time,kind,by\n2026-01-05T07:00Z,note,AB,extra\n", r"line 2: more cells"),
        (
            b"time,kind,by,id\n2026-01-05T07:00Z,note,AB,1; DROP TABLE entries\n",
            r"line 2: id .* is not an entry id",
        ),
        (b"", r"empty"),
        (b"\xef\xbb\xbf", r"empty"),
        ("time,kind,by\n".encode("utf-32"), r"NUL"),
    ],
)
def test_malformed_files_get_a_line_numbered_message(book, data, message):
    with pytest.raises(BookError, match=message):
        import_csv(book, data, UTC_ZONE)
    assert _count(book) == 0


def test_the_same_id_twice_in_one_file_is_an_error_not_a_silent_skip(book):
    entry_id = str(uuid.uuid4())
    data = (
        "id,time,kind,target,by,note\n"
        f"{entry_id},2026-01-05T07:00Z,note,P1,AB,first\n"
        f"{entry_id},2026-01-05T08:00Z,note,P1,AB,second and different\n"
    ).encode()
    with pytest.raises(BookError, match="line 3: id .* repeats line 2"):
        import_csv(book, data, UTC_ZONE)
    assert _count(book) == 0


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16", "utf-16-be"])
def test_byte_order_marks_and_utf16_are_read(book, encoding):
    text = "time,kind,target,by,note\n2026-01-05T07:00Z,note,P1,AB,Öl über 50 °C\n"
    data = text.encode(encoding)
    if encoding == "utf-16-be":
        data = b"\xfe\xff" + data  # with its byte order mark, as a spreadsheet writes it
    assert import_csv(book, data, UTC_ZONE).added == 1
    assert journal.read(book)[0].note == "Öl über 50 °C"


# ---- export: formulas neutralised, import restores them ---------------------------------------

text_cell = st.one_of(
    st.builds(
        lambda start, rest: start + rest,
        st.sampled_from([*SPREADSHEET_TRIGGERS, "'", "''", "=="]),
        st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), max_size=40),
    ),
    st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), max_size=40),
)


def test_neutralise_and_restore_are_inverse():
    for text in ["=1+1", "+1", "-1", "@x", "\tx", "\rx", "'x", "''=", "plain", "", "'"]:
        assert restore(neutralise(text)) == text
        assert not neutralise(text).startswith(SPREADSHEET_TRIGGERS)


@FUZZ
@given(cells=st.lists(st.tuples(text_cell, text_cell, text_cell), min_size=1, max_size=5))
def test_export_neutralises_formulas_and_import_gives_them_back(template, cells):
    with Fresh(template) as book, Fresh(template) as twin:
        for note, condition, batch in cells:
            # (the book trims outer whitespace of text fields: compare what it stored)
            record.log(
                book,
                ElementChange(filter="P1-RF", note=note, condition=condition, batch=batch, by="AB"),
            )
            record.log(book, Reading(filter="P1-RF", dp_bar=0.5, temp_c=-12.5, note=note, by="AB"))
        entries = journal.read(book)
        out = io.StringIO()
        write_span(out, book, None, None, Prefs(), UTC_ZONE, book.shift_pattern())
        rows = list(csv.reader(io.StringIO(out.getvalue(), newline="")))
        header, body = rows[0], rows[1:]
        keys = Prefs().unit_keys()
        numbers = {
            c.header(keys) for c in COLUMNS if c.quantity or c.cell in ("number", "filtered")
        }
        for row in body:
            for name, cell in zip(header, row, strict=True):
                if name in numbers:
                    assert cell == "" or float(cell) == float(cell)  # a plain number
                else:
                    assert not cell.startswith(SPREADSHEET_TRIGGERS), (name, cell)
        result = import_csv(twin, out.getvalue().encode(), UTC_ZONE)
        assert result.added == len(entries)
        back = {e.id: e for e in journal.read(twin)}
        for e in entries:
            assert back[e.id].note == e.note
            if isinstance(e, ElementChange):
                assert (back[e.id].condition, back[e.id].batch) == (e.condition, e.batch)
            else:
                assert back[e.id].temp_c == e.temp_c  # a negative number is not "neutralised"


def test_formula_start_covers_the_spreadsheet_triggers():
    assert set(SPREADSHEET_TRIGGERS) <= set(FORMULA_START)


# ---- injection through every text field --------------------------------------------------------

PAYLOADS = [
    "'; DROP TABLE entries; --",
    '"; DROP TABLE entries; --',
    "x' OR '1'='1",
    "') ; DELETE FROM entries WHERE ('1'='1",
    "Robert'); DROP TABLE technicians;--",
    "1; ATTACH DATABASE 'pwn.db' AS pwn; --",
    "%",
    "_",
    "*",
    "\\' OR 1=1 --",
]


def _fingerprint(book) -> tuple:
    tables = [
        r[0]
        for r in book.conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")
        if r[0] not in ("status_cache", "kept_seen")  # derived: legitimately change on writes
    ]
    counts = {t: book.conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables}
    return _schema(book), counts, book.conn.execute("PRAGMA database_list").fetchall()


def test_sql_injection_through_every_text_field_is_stored_as_text(book, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # where an ATTACH 'pwn.db' would land
    schema_before = _schema(book)
    for i, payload in enumerate(PAYLOADS):
        # register text fields: stored exactly
        register.add(book, Technician(tag=f"T{i}", name=payload))
        register.add(book, Fluid(tag=f"F{i}", name=payload))
        register.add(book, Unit(tag=f"U{i}", name=payload, area=payload))
        register.add(
            book, FilterPosition(tag=f"U{i}-F", unit=f"U{i}", kind="return", element=payload)
        )
        register.add(book, Breather(tag=f"U{i}-B", unit=f"U{i}"))
        register.update(book, Unit, f"U{i}", {"name": payload + " (changed)"}, by=f"T{i}")
        # entry text fields: stored exactly
        saved = record.log_many(
            book,
            [
                Reading(filter=f"U{i}-F", dp_bar=0.7, note=payload, by=f"T{i}"),
                ElementChange(
                    filter=f"U{i}-F", condition=payload, batch=payload, note=payload, by=f"T{i}"
                ),
                BreatherSwap(breather=f"U{i}-B", condition=payload, note=payload, by=f"T{i}"),
                TopUp(unit=f"U{i}", volume_l=5, fluid=f"F{i}", note=payload, by=f"T{i}"),
                Sample(unit=f"U{i}", code="18/16/13", note=payload, by=f"T{i}"),
                Note(unit=f"U{i}", note=payload, by=f"T{i}"),
            ],
        )
        record.log(book, Void(voids=saved[0].id, note=payload, by=f"T{i}"))
        back = {e.id: e for e in journal.read(book, unit=f"U{i}")}
        for e in saved:
            assert back[e.id].note == payload.strip()
        assert register.get(book, Technician, f"T{i}").name == payload
        assert register.get(book, Unit, f"U{i}").area == payload
        assert register.get(book, FilterPosition, f"U{i}-F").element == payload
        book.set_setting(payload, payload)  # settings: key and value
        assert book.setting(payload) == payload
        # every lookup by text finds nothing rather than everything
        for cls in (Technician, Fluid, Unit, FilterPosition, Breather):
            with pytest.raises(BookError, match="unknown|not a usable"):
                register.get(book, cls, payload)
        with pytest.raises(BookError):
            journal.find_entry(book, payload)
        assert journal.read(book, unit=payload) == [] and journal.read(book, filter=payload) == []
        for bad in (
            Note(unit="P1", note="x", by=payload),
            Reading(filter=payload, dp_bar=1.0, by="AB"),
            TopUp(unit="P1", volume_l=5, fluid=payload, by="AB"),
            Void(voids=payload, note="x", by="AB"),
            ElementChange(filter="P1-RF", reason=payload, by="AB"),
            Sample(unit="P1", code=payload, by="AB"),
        ):
            with pytest.raises(BookError):
                record.log(book, bad)
        with pytest.raises(BookError):
            register.add(book, Technician(tag=payload))
        try:  # shift names are words: most payloads are refused, "_" is a fine name
            register.set_shifts(book, [(payload, "06:00")])
        except BookError:
            pass
        else:
            assert [s.name for s in register.list_shifts(book)] == [payload]
    assert _schema(book) == schema_before
    # nothing attached ('temp' is the connection's own temporary schema, which the schema's
    # table rebuilds on creation bring into use)
    attached = book.conn.execute("PRAGMA database_list").fetchall()
    assert [name for _, name, _ in attached if name != "temp"] == ["main"]
    assert not (tmp_path / "pwn.db").exists()
    assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_sql_injection_through_csv_cells_and_file_names(book, tmp_path):
    from store.db.backup import copy_to, restore
    from store.exchange.merge import merge

    before = _fingerprint(book)
    for payload in PAYLOADS:
        cells = [payload.replace('"', '""')] * 6
        data = (
            "time,kind,target,by,condition,batch,note\n"
            f'2026-01-05T07:00Z,change,P1-RF,AB,"{cells[0]}","{cells[1]}","{cells[2]}"\n'
            + f'2026-01-05T07:00Z,note,"{cells[3]}",AB,,,x\n'
        ).encode()
        with pytest.raises(BookError, match="line 3: unknown unit"):
            import_csv(book, data, UTC_ZONE)
        assert _fingerprint(book) == before
    ok = "time,kind,target,by,note\n" + "".join(
        '2026-01-05T07:00Z,note,P1,AB,"{}"\n'.format(p.replace('"', '""')) for p in PAYLOADS
    )
    assert import_csv(book, ok.encode(), UTC_ZONE).added == len(PAYLOADS)
    assert sorted(e.note for e in journal.read(book)) == sorted(p.strip() for p in PAYLOADS)
    # File names are text too: they never reach SQL (URIs are quoted, paths are not spliced).
    odd = tmp_path / "it's; DROP TABLE entries; --?#%.db"
    copy_to(book.conn, odd)
    with open_book(odd) as other:
        assert _count(other) == len(PAYLOADS)
        record.log(other, Note(unit="P1", note="from the odd file", by="AB"))
    report = merge(book, odd)
    assert report.entries_added == 1
    assert restore(odd, tmp_path / "x'; --.db") is None
    conn = sqlite3.connect(tmp_path / "x'; --.db")
    assert conn.execute("SELECT count(*) FROM entries").fetchone()[0] == len(PAYLOADS) + 1
    conn.close()


def test_text_that_is_not_text_is_refused_clearly(book):
    # A terminal hands undecodable bytes over as lone surrogates (Python's surrogateescape).
    bad = "pump \udcff noisy"
    for attempt in (
        lambda: record.log(book, Note(unit="P1", note=bad, by="AB")),
        lambda: register.add(book, Unit(tag="P9", name=bad)),
        lambda: book.set_setting("name", bad),
    ):
        with pytest.raises(BookError, match="not (valid )?text"):
            attempt()
    assert _count(book) == 0 and not book.conn.in_transaction


def test_a_cell_of_minus_zero_is_read_as_zero():
    # IEEE 754-2008 §6.3: -0 + +0 is +0; a spreadsheet may write "-0" for a rounded -0.001
    import math

    from store.exchange.csvcolumns import parse_number

    for cell in ("-0", "-0.0", " -0,00 "):
        value = parse_number(cell, "dp_bar")
        assert value == 0 and math.copysign(1.0, value) == 1.0, cell
