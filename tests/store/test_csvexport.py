"""The one exporter (store/exchange/csvexport.py) writes exactly what the entry-based oracle writes.

The reference for every check here is the plain path kept in tests/kit/csv_oracle.py:
`write_csv` over `journal.read(book, since=, until=)` (and, for single pieces, `neutralise`
with the `csv` module, `timeutil.iso_local`, `export_rows`). No number in this file is an
expected result: the tests compare the two paths byte for byte, on the demo plant and on a
small plant that holds every entry kind and every awkward cell.

Clock changes come from the IANA tz database (located at test time with the standard
library's zoneinfo, not typed in): Europe/Berlin (EU Directive 2000/84/EC: last Sundays of
March and October), America/Chicago (US Energy Policy Act of 2005: second Sunday of March,
first Sunday of November), Australia/Lord_Howe (a half-hour change on a half-hour offset),
America/St_Johns (a half-hour offset whose changes fall at a half hour of UTC) and
Asia/Kolkata (a half-hour offset that never changes).
"""

from __future__ import annotations

import csv
import io
import random
import uuid
from collections.abc import Iterator
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from zoneinfo import ZoneInfo

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from store import record
from store.base.prefs import Prefs
from store.base.session import fixed_clock
from store.base.timeutil import format_utc, iso_local, next_shift, previous_shift, shift_at, zone
from store.db.book import Book, open_book
from store.exchange.csvcolumns import header
from store.exchange.csvexport import (
    FilterReference,
    LocalClock,
    _plain_cell,
    _plain_ids,
    csv_field,
    write_span,
)
from store.exchange.csvio import import_csv
from store.exchange.demo import create_demo
from store.health.conditions import contexts
from store.ledger import journal, register
from store.ledger.entries import (
    BreatherSwap,
    ElementChange,
    Entry,
    Note,
    Reading,
    Sample,
    TopUp,
    Void,
)
from store.ledger.register import FilterPosition, Fluid, Unit
from store.sheets import shift_log, watch_rows
from store.views import watch
from tests.kit.csv_oracle import export_rows, neutralise, write_csv
from tests.kit.plant import fill_register, raw_entry_count, run_cli

ZONES = (
    "Europe/Berlin",
    "America/Chicago",
    "Australia/Lord_Howe",
    "America/St_Johns",
    "Asia/Kolkata",
)
UNIT_CHOICES = (
    Prefs(),
    Prefs(pressure="psi", temperature="F", volume="gal"),
    Prefs(pressure="kPa", temperature="C", volume="L"),
)
YEAR = 2026
NOW = "2027-01-01T00:00:00Z"  # the built plant's clock: every entry of 2026 lies before it
NOTES = ("=SUM(A1:A9)", '-3 bar, "odd" smell\nsecond line', "+1", "@all", "plain words")
QUICK = settings(
    max_examples=150,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture],
)


def transitions(zone_name: str, year: int) -> list[datetime]:
    """The UTC instants at which the zone's offset changes in `year` (zoneinfo, to the second)."""
    tz = ZoneInfo(zone_name)
    step = timedelta(minutes=15)
    found = []
    moment = datetime(year, 1, 1, tzinfo=UTC)
    while moment.year == year:
        after = moment + step
        if moment.astimezone(tz).utcoffset() != after.astimezone(tz).utcoffset():
            low, high = moment, after
            while high - low > timedelta(seconds=1):
                middle = low + (high - low) / 2
                if middle.astimezone(tz).utcoffset() == low.astimezone(tz).utcoffset():
                    low = middle
                else:
                    high = middle
            found.append(high.replace(microsecond=0))
        moment = after
    return found


def instants() -> list[datetime]:
    """Moments around every clock change of every zone, and a few plain ones."""
    around = (-3660, -1800, -1, 0, 1, 1740, 3599, 3660, 6 * 3600)
    moments = {datetime(YEAR, 1, 5, 21, 59, 59, tzinfo=UTC), datetime(YEAR, 7, 1, tzinfo=UTC)}
    for name in ZONES:
        for change in transitions(name, YEAR):
            moments |= {change + timedelta(seconds=s) for s in around}
    return sorted(moments)


def entry_for(i: int, at: datetime) -> Entry:
    """Entry number i of a cycle that covers every kind and every awkward cell."""
    by = ("AB", "CD")[i % 2]
    make = (
        lambda: Reading(filter="P1-RF", dp_bar=1.23, temp_c=48.5, flow_lpm=110.0, hours=1200 + i),
        lambda: Reading(filter="P1-RF", dp_bar=0.9),  # temperature and flow assumed
        lambda: Reading(filter="P1-PF", indicator="clean"),  # indicator only
        lambda: Reading(filter="P1-PF", dp_bar=2.05, indicator="dirty", temp_c=35),
        lambda: Reading(filter="P2-RF", dp_bar=1.1, temp_c=45),  # fluid with no viscosity data
        lambda: Reading(filter="P3-PF", dp_bar=0.7),  # unit with no fluid
        lambda: Reading(filter="P4-RF", dp_bar=0.5, temp_c=150, flow_lpm=40),  # too thin there
        lambda: Reading(filter="P4-RF", dp_bar=0.0, temp_c=-12.5, flow_lpm=60.25),
        lambda: Reading(filter="P4-RF", dp_bar=0.8, flow_lpm=45),  # temperature assumed
        lambda: ElementChange(
            filter="P1-RF", reason="limit", condition='-caked, "brown"', batch="=B7", hours=1300
        ),
        lambda: TopUp(unit="P1", volume_l=12.5, fluid="HV46", filtered_um=10, hours=1310.5),
        lambda: TopUp(unit="P4", volume_l=3.0),  # unfiltered, the unit's own fluid
        lambda: BreatherSwap(breather="P1-BR", reason="spent", condition="+2/3 spent"),
        lambda: Sample(unit="P1", c4_per_ml=2500, c6_per_ml=640, c14_per_ml=80, water_ppm=120),
        lambda: Sample(unit="P1", code="18/16/13"),
        lambda: Note(unit="P1", note=NOTES[i % len(NOTES)]),
        lambda: Note(note="@plant-wide: " + NOTES[(i + 1) % len(NOTES)]),  # no unit
    )[i % 17]()
    return replace(make, at=at, by=by)


def add_plant(book: Book) -> None:
    """fill_register's plant plus the positions whose readings cannot all be normalised."""
    fill_register(book)
    register.add(book, Fluid(tag="NOVIS", name="oil of unknown grade"))
    # ν40 10 and ν100 2.6 mm²/s: an invented thin fluid whose Walther curve falls below
    # 2 mm²/s (the ASTM D341 limit store/physics/fluid.py keeps) before 150 °C
    register.add(book, Fluid(tag="THIN", name="thin fluid", nu40_cst=10.0, nu100_cst=2.6))
    register.add(book, Unit(tag="P2", fluid="NOVIS"))
    register.add(book, Unit(tag="P3"))
    register.add(book, Unit(tag="P4", fluid="THIN", normal_temp_c=40))
    register.add(book, FilterPosition(tag="P2-RF", unit="P2", kind="return"))
    register.add(book, FilterPosition(tag="P3-PF", unit="P3", kind="pressure"))
    register.add(book, FilterPosition(tag="P4-RF", unit="P4", kind="return", normal_flow_lpm=50))


def log_plant_entries(book: Book) -> None:
    saved = record.log_many(book, [entry_for(i, at) for i, at in enumerate(instants())])
    # void a reading, a change and a note, each a little after it was logged
    for entry in (saved[0], saved[9], saved[15]):
        record.log(
            book,
            Void(voids=entry.id, note="-logged on the wrong filter", by="AB", at=entry.at),
        )


@pytest.fixture(scope="module")
def plant(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Book]:
    path = tmp_path_factory.mktemp("plant") / "plant.db"
    with open_book(path, clock=fixed_clock(NOW)) as book:
        add_plant(book)
        log_plant_entries(book)
        yield book


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Book]:
    with create_demo(tmp_path_factory.mktemp("demo") / "demo.db") as book:
        yield book


def exports(
    book: Book,
    start: datetime | None,
    end: datetime | None,
    prefs: Prefs,
    status: bool = False,
) -> tuple[str, str]:
    """(entry-based export, fast export) of the same span; with `status`, the status rows as
    of the span's last second (or now), as the shift-log screen's handover reads them."""
    local, pattern = book.local_zone(), book.shift_pattern()
    old, new = io.StringIO(), io.StringIO()
    entries = journal.read(book, since=start, until=end)
    now = book.now()
    as_of = now if end is None else min(end - timedelta(seconds=1), now)
    if start is not None and as_of < start:
        as_of = None  # a span that has not begun: no handover yet
    old_count = write_csv(old, book, entries, prefs, local, pattern, as_of, status)
    new_count = write_span(new, book, start, end, prefs, local, pattern, status)
    assert new_count == old_count == len(entries)
    assert not book.conn.in_transaction
    return old.getvalue(), new.getvalue()


def assert_same(
    book: Book,
    start: datetime | None,
    end: datetime | None,
    prefs: Prefs,
    status: bool = False,
) -> str:
    """The fast export equals the entry-based one (the reference: no typed-in result)."""
    old, new = exports(book, start, end, prefs, status)
    assert new.splitlines(keepends=True) == old.splitlines(keepends=True)
    assert new == old
    return old


def local_moment(book: Book, text: str) -> datetime:
    return datetime.fromisoformat(text).replace(tzinfo=book.local_zone()).astimezone(UTC)


# ---- whole exports -------------------------------------------------------------------------------


@pytest.mark.parametrize("prefs", UNIT_CHOICES)
def test_the_demo_plant_exports_the_same(demo, prefs):
    # the whole book, then one shift on each side of Vienna's clock change of 25 October 2026
    # (EU Directive 2000/84/EC) and a span across it
    text = assert_same(demo, None, None, prefs)
    assert text.count("\r\n") > 1000
    for start, end in (
        ("2026-10-24T22:00", "2026-10-25T06:00"),
        ("2026-10-25T06:00", "2026-10-25T14:00"),
        ("2026-10-01T00:00", "2026-11-01T00:00"),
    ):
        assert_same(demo, local_moment(demo, start), local_moment(demo, end), prefs)


@pytest.mark.parametrize("zone_name", ZONES)
@pytest.mark.parametrize("prefs", UNIT_CHOICES)
def test_every_kind_and_cell_exports_the_same_in_every_zone(plant, zone_name, prefs):
    plant.set_setting("timezone", zone_name)
    text = assert_same(plant, None, None, prefs)
    rows = list(csv.DictReader(io.StringIO(text)))
    # the plant holds what this test is about (else the equality proves little)
    assert {r["kind"] for r in rows} == {
        "reading",
        "change",
        "topup",
        "breather",
        "sample",
        "note",
        "void",
    }
    references = {r["reference"] for r in rows}
    assert any(ref.startswith("not normalised: fluid 'oil of unknown grade'") for ref in references)
    assert "not normalised: the unit has no fluid registered" in references
    assert any(ref.startswith("not normalised: viscosity at 150") for ref in references)
    assert {ref.partition("; ")[2] for ref in references} >= {
        "temp assumed normal",
        "flow assumed normal",
        "temp and flow assumed normal",
    }
    notes = {r["note"] for r in rows}
    assert {note[:2] for note in notes if note} >= {"'=", "'-", "'+", "'@"}
    assert any('"' in note and "," in note and "\n" in note for note in notes)
    assert sum(1 for r in rows if r["voided_by"]) == 3
    offsets = {r["time"][19:] for r in rows}
    assert len(offsets) == (1 if zone_name == "Asia/Kolkata" else 2)


@pytest.mark.parametrize("zone_name", ZONES)
def test_spans_across_a_clock_change_and_open_ended_spans_export_the_same(plant, zone_name):
    plant.set_setting("timezone", zone_name)
    for change in transitions(zone_name, YEAR):
        day = timedelta(days=1)
        assert_same(plant, change - day, change + day, Prefs())
        assert_same(
            plant,
            change - timedelta(hours=1),
            None,
            Prefs(pressure="psi", temperature="F", volume="gal"),
        )
        assert_same(plant, change - timedelta(seconds=1), change + timedelta(seconds=2), Prefs())


def test_a_span_with_nothing_in_it_is_the_header_alone(plant):
    start = datetime(YEAR - 5, 1, 1, tzinfo=UTC)
    text = assert_same(plant, start, start + timedelta(days=1), Prefs())
    assert text == ",".join(header(Prefs())) + "\r\n"


def test_the_command_line_writes_the_same_file(plant, tmp_path, monkeypatch):
    from tui.cli import main

    plant.set_setting("timezone", "America/Chicago")
    out, bare = tmp_path / "year.csv", tmp_path / "entries.csv"
    monkeypatch.setenv("SUMPBOOK_NOW", NOW)
    args = ["--db", str(plant.path), "export", "--from", f"{YEAR}-01-01T00:00", "-o"]
    assert main([*args, str(out)]) == 0
    assert main([*args, str(bare), "--entries-only"]) == 0
    start = local_moment(plant, f"{YEAR}-01-01T00:00")
    with_status, _ = exports(plant, start, None, Prefs(), status=True)
    entries_only, _ = exports(plant, start, None, Prefs())
    assert out.read_bytes() == b"\xef\xbb\xbf" + with_status.encode("utf-8")  # UTF-8's BOM first
    assert bare.read_bytes() == b"\xef\xbb\xbf" + entries_only.encode("utf-8")
    assert with_status.startswith(entries_only.partition("\r\n")[0] + ",flags,")
    assert not (tmp_path / "year.csv.part").exists()


def test_the_shift_log_screen_writes_the_same_file(plant, tmp_path):
    from tui.screens.shift_log import export_file

    plant.set_setting("timezone", "Europe/Berlin")
    change = transitions("Europe/Berlin", YEAR)[1]  # the night the clocks go back
    span = shift_at(change, plant.shift_pattern(), plant.local_zone())
    out = tmp_path / "night.csv"
    units = Prefs(pressure="psi", temperature="F", volume="gal")
    count = export_file(str(plant.path), out, span, units, plant.clock)
    old, _ = exports(plant, span.start, span.end, units, status=True)
    assert count == len(journal.read(plant, since=span.start, until=span.end)) > 0
    assert out.read_bytes() == b"\xef\xbb\xbf" + old.encode("utf-8")


# ---- the status rows of the handover ------------------------------------------------------------


def status_lines(text: str) -> list[dict[str, str]]:
    return [r for r in csv.DictReader(io.StringIO(text)) if r["kind"] == "status"]


@pytest.mark.parametrize("prefs", UNIT_CHOICES)
def test_the_demo_plants_handover_exports_the_same(demo, prefs):
    local, pattern = demo.local_zone(), demo.shift_pattern()
    current = shift_at(demo.now(), pattern, local)
    previous = previous_shift(current, pattern, local)
    week_ago = shift_at(demo.now() - timedelta(days=7), pattern, local)
    spans = [(None, None), (current.start, current.end), (previous.start, previous.end)]
    spans += [(week_ago.start, week_ago.end), (week_ago.start, None)]
    for start, end in spans:
        text = assert_same(demo, start, end, prefs, status=True)
        rows = status_lines(text)
        assert rows, (start, end)  # the demo plant always has something flagged
        assert len({r["time"] for r in rows}) == 1
    later = next_shift(current, pattern, local)  # has not begun: no handover yet
    text = assert_same(demo, later.start, later.end, prefs, status=True)
    assert text.count("\r\n") == 1 and text.rstrip().endswith(
        ",flags,due_earliest,due,next_reading"
    )


def test_the_status_rows_hold_the_screens_handover_most_urgent_first(demo):
    # the shift-log screen's own lists (store.sheets.shift_log) against the file's rows
    pattern, local = demo.shift_pattern(), demo.local_zone()
    span = previous_shift(shift_at(demo.now(), pattern, local), pattern, local)
    screen = shift_log(demo, span)
    _, text = exports(demo, span.start, span.end, Prefs(), status=True)
    rows = status_lines(text)
    tags = [r["target"] for r in rows]
    assert {r.tag for r in screen.open_flags} | {r.tag for r in screen.due_next} <= set(tags)
    assert all(r["time"] == iso_local(screen.as_of, local) for r in rows)
    order = [r.tag for r in watch_rows(watch(demo, as_of=screen.as_of)) if r.tag in tags]
    assert tags == order  # the watch list's order: store/health/urgency.py
    assert any(r["flags"] and r["due"] for r in rows)
    assert any(r["next_reading"] for r in rows)


def test_a_past_shift_exported_again_later_is_the_same_file(live, monkeypatch):
    with open_book(live, create=False) as book:
        pattern, local, now = book.shift_pattern(), book.local_zone(), book.now()
        span = previous_shift(shift_at(now, pattern, local), pattern, local)
        first = io.StringIO()
        write_span(first, book, span.start, span.end, Prefs(), local, pattern, status=True)
        assert status_lines(first.getvalue())
        # a week on, with a reading and an element change logged since on a filter it lists
        tag = next(r["target"] for r in status_lines(first.getvalue()) if r["next_reading"])
        later = now + timedelta(days=7)
        book.set_setting("clock", format_utc(later))  # the demo's frozen clock moved on
        record.log(book, Reading(filter=tag, dp_bar=0.4, by="AK", at=later - timedelta(days=2)))
        change = ElementChange(filter=tag, reason="limit", by="AK", at=later - timedelta(days=1))
        record.log(book, change)
        again = io.StringIO()
        write_span(again, book, span.start, span.end, Prefs(), local, pattern, status=True)
    assert again.getvalue() == first.getvalue()


def test_an_exported_shift_log_imports_as_nothing_new_and_says_so(live, tmp_path, capsys):
    out = tmp_path / "shift.csv"
    code, _, _ = run_cli(capsys, "--db", str(live), "export", "--shift", "previous", "-o", str(out))
    assert code == 0
    text = out.read_text(encoding="utf-8-sig")
    entries = sum(1 for r in csv.DictReader(io.StringIO(text)) if r["kind"] != "status")
    statuses = len(status_lines(text))
    assert entries > 0 and statuses > 0
    before = raw_entry_count(live)
    code, said, err = run_cli(capsys, "--db", str(live), "import", str(out))
    assert code == 0, err
    assert said.strip() == (
        f"imported 0 entries; {entries} were in the book already; {statuses} status rows "
        "passed over (a shift log's handover, not entries)"
    )
    assert raw_entry_count(live) == before
    with open_book(live, create=False) as book:  # the same, through the store
        result = import_csv(book, out.read_bytes(), book.local_zone())
    assert (result.added, result.skipped, result.status_rows) == (0, entries, statuses)


def test_stamps_not_in_the_books_own_form_export_the_same(book, monkeypatch):
    # journal reads these too (ISO 8601 forms written by hand or by another program)
    book.clock = fixed_clock(NOW)
    book.set_setting("timezone", "Europe/Berlin")
    record.log_many(book, [entry_for(i, at) for i, at in enumerate(instants()[:4])])  # P1 only
    odd = ("2026-07-01T070000.5Z", "2026-W27-3T07:00:01Z", "2026-7-1T7:00:02Z")
    # schema 4 refuses such stamps: plant them as a hand-made edit past the checks would
    book.conn.execute("PRAGMA ignore_check_constraints = ON")
    with book.atomic():
        for i, stamp in enumerate(odd):
            book.conn.execute(
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, note) "
                "VALUES (?, ?, ?, 'note', 'AB', 'P1', ?)",
                [f"00000000-0000-4000-8000-00000000000{i}", stamp, stamp, f"odd {i}"],
            )
    text = assert_same(book, None, None, Prefs())
    assert all(f"odd {i}" in text for i in range(len(odd)))
    assert_same(book, datetime(YEAR, 6, 1, tzinfo=UTC), None, Prefs())


def test_a_write_that_fails_half_way_ends_the_read(plant):
    class FullDisk(io.StringIO):
        def write(self, text: str) -> int:
            if self.tell():
                raise OSError(28, "No space left on device")
            return super().write(text)

    with pytest.raises(OSError):
        write_span(FullDisk(), plant, None, None, Prefs(), zone("UTC"), plant.shift_pattern())
    assert not plant.conn.in_transaction


def test_memos_that_fill_up_start_again_and_change_nothing(plant, monkeypatch):
    plant.set_setting("timezone", "America/St_Johns")
    monkeypatch.setattr("store.exchange.csvexport._MEMO_SIZE", 2)
    assert_same(plant, None, None, Prefs(pressure="psi", temperature="F", volume="gal"))


# ---- the pieces, against the functions the entry-based export uses --------------------------------


@QUICK
@given(st.text())
def test_a_text_cell_is_neutralised_and_quoted_as_the_csv_module_does(text):
    expected = io.StringIO()
    csv.writer(expected, lineterminator="\r\n").writerow([neutralise(text), "x"])
    assert csv_field(text) + ",x\r\n" == expected.getvalue()


@pytest.mark.parametrize("zone_name", ZONES)
def test_local_times_are_what_iso_local_writes(zone_name):
    local = zone(zone_name)
    clock = LocalClock(local)
    moments = []
    for change in transitions(zone_name, YEAR):
        start = change - timedelta(hours=2)
        moments += [start + timedelta(seconds=s) for s in range(0, 4 * 3600, 61)]
    moments += [datetime(YEAR, 5, 5, tzinfo=UTC) + timedelta(hours=h) for h in range(0, 9000, 7)]
    for moment in moments:
        assert clock.text(format_utc(moment)) == iso_local(moment, local)


@QUICK
@given(
    position=st.sampled_from(["P1-RF", "P1-PF", "P2-RF", "P3-PF", "P4-RF"]),
    dp_bar=st.floats(0, 100) | st.sampled_from([0.0, -0.0, -1.0, 1e-300, 1e300, float("inf")]),
    temp_c=st.none() | st.floats(-60, 200) | st.sampled_from([-40.0, 150.0, 40.0]),
    flow_lpm=st.none() | st.floats(0, 1e5) | st.sampled_from([0.0, -5.0, 1e-300, 1e300]),
)
def test_reference_cells_are_what_export_rows_writes(plant, position, dp_bar, temp_c, flow_lpm):
    prefs = Prefs(pressure="psi", temperature="C", volume="L")
    at = datetime(YEAR, 3, 1, tzinfo=UTC)
    reading = Reading(filter=position, dp_bar=dp_bar, temp_c=temp_c, flow_lpm=flow_lpm, at=at)
    try:
        row = next(export_rows(plant, [reading], prefs, zone("UTC"), []))
        expected: object = (row["dp_ref_psi"], row["reference"])
    except (ArithmeticError, ValueError) as exc:  # the entry-based path fails on it too
        expected = type(exc)
    reference = FilterReference(position, contexts(plant)[position], "psi")
    try:
        dp_ref, cell = reference.cells(dp_bar, temp_c, flow_lpm)
        found: object = (dp_ref, next(csv.reader([cell + ",x"]))[0])
    except (ArithmeticError, ValueError) as exc:
        found = type(exc)
    assert found == expected


def test_an_export_inside_a_transaction_leaves_it_open(plant):
    plant.set_setting("timezone", "Europe/Berlin")
    old, _ = exports(plant, None, None, Prefs())
    out = io.StringIO()
    with plant.atomic():
        write_span(out, plant, None, None, Prefs(), plant.local_zone(), plant.shift_pattern())
        assert plant.conn.in_transaction
    assert not plant.conn.in_transaction
    assert out.getvalue() == old


# ---- the remembered pieces of a reading's line, against the oracle -------------------------------

# ΔP, temperature, flow and hour-meter values that are hard to write: halfway cases of the
# fourth (second) decimal as typed and as stored in binary (2.675 is 2.67499999... in binary,
# 1.00005 is 1.000050000000000061...), tiny and large values, integers stored as integers,
# zero and its negative twin; the exact decimal of each binary value is what Python rounds
# from (IEEE 754 binary64), and the oracle writes it with Python's own formatting.
AWKWARD_NUMBERS = (
    0.0, -0.0, 1, 2, 0.00005, 0.00015, 0.00025, 1.00005, 1.00015, 2.675, 0.125, 1e-7,
    3.99995, 9.99995, 99.99995, 123.45675, 0.1 + 0.2, 1 / 3, 2 / 3, 47.005, 47.015, 54,
    12345.67895, 9999999.99995, 1e-300, 1e15, 1e16, 123456789012.5,
)  # fmt: skip
AWKWARD_TEXTS = (
    "",
    "plain words",
    '=HYPERLINK("x")',
    "+1 bar",
    "-0.5 bar",
    "@all",
    "\tindented",
    "'quoted already",
    "comma, then more",
    'a "quote" inside',
    "two\nlines",
    "carriage\rreturn",
    "µm, °C, ν and ΔP",
    'ends with a quote"',
    "nul\x00inside, and a comma",  # planted past the checks
)


def plant_awkward_readings(book: Book) -> None:
    """Readings with every awkward value above, each on several filters (positions alike and
    unlike in their reference), some stored past the checks as a hand edit would."""
    rng = random.Random(4406)  # a fixed draw: the same rows every run
    numbers = list(AWKWARD_NUMBERS) + [rng.uniform(0, 10) for _ in range(41)]
    numbers += [round(rng.uniform(0, 100), rng.randint(0, 6)) for _ in range(40)]
    filters = ("P1-RF", "P1-PF", "P2-RF", "P3-PF", "P4-RF")  # five: prime to the count of values
    book.conn.execute("PRAGMA ignore_check_constraints = ON")
    moment = datetime(YEAR, 3, 1, tzinfo=UTC)
    rows = []
    for i in range(600):
        moment += timedelta(minutes=rng.choice((1, 7, 61, 479)))
        tag = filters[i % len(filters)]
        dp = numbers[i % len(numbers)] if i % 11 else None
        temp = None if i % 5 == 0 else numbers[(i * 7) % len(numbers)]
        flow = None if i % 3 else numbers[(i * 5) % len(numbers)]
        hours = None if i % 4 else numbers[(i * 3) % len(numbers)]
        indicator = None if dp is not None else ("clean", "dirty", "bypass")[i % 3]
        note = AWKWARD_TEXTS[i % len(AWKWARD_TEXTS)] if i % 2 else ""
        rows.append(
            (str(uuid.UUID(int=rng.getrandbits(128), version=4)), format_utc(moment), tag,
             tag.split("-")[0], ("AB", "CD")[i % 2], dp, indicator, temp, flow, hours, note)
        )  # fmt: skip
    with book.atomic():
        book.conn.executemany(
            "INSERT INTO entries (id, at_utc, logged_utc, kind, filter, unit, by, dp_bar, "
            "indicator, temp_c, flow_lpm, hours, note) "
            "VALUES (?, ?, ?2, 'reading', ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            rows,
        )
    book.conn.execute("PRAGMA ignore_check_constraints = OFF")


@pytest.mark.parametrize("zone_name", ("Europe/Berlin", "Asia/Kolkata"))
@pytest.mark.parametrize("prefs", UNIT_CHOICES)
def test_awkward_readings_export_as_the_oracle_writes_them(tmp_path, zone_name, prefs):
    with open_book(tmp_path / "awkward.db", clock=fixed_clock(NOW)) as book:
        add_plant(book)
        book.set_setting("timezone", zone_name)
        plant_awkward_readings(book)
        text = assert_same(book, None, None, prefs)
        text = assert_same(book, datetime(YEAR, 3, 2, tzinfo=UTC), None, prefs, status=True)
    notes = {r["note"] for r in csv.DictReader(io.StringIO(text))}
    assert {'\'=HYPERLINK("x")', "'+1 bar", "'@all", "two\nlines"} <= notes


# ---- ids, stamps and the second query of the span, against the oracle ----------------------------

# Ids a hand edit past the checks could leave (the book writes UUIDs): each would be changed by
# the formula guard or quoted, or is empty; the reading path writes a plain id as it is.
AWKWARD_IDS = ("=1+2", "+id", "-id", "@id", "\tid", "'id", "a,b", 'say "id"', "two\nlines", "")
UNREADABLE = 6  # the one of them whose stamp journal cannot read: a reading, in an hour read before


def test_awkward_ids_and_stamps_export_as_the_oracle_writes_them(tmp_path):
    # the stamps: the book's own form, its form with microseconds (schema 4 allows both), and
    # one that journal cannot read (the oracle leaves that entry out and says so)
    with open_book(tmp_path / "ids.db", clock=fixed_clock(NOW)) as book:
        add_plant(book)
        book.set_setting("timezone", "Europe/Berlin")
        record.log_many(book, [entry_for(i, at) for i, at in enumerate(instants()[:40])])
        moment = datetime(YEAR, 8, 3, 9, 15, tzinfo=UTC)
        book.conn.execute("PRAGMA ignore_check_constraints = ON")
        with book.atomic():
            for i, entry_id in enumerate(AWKWARD_IDS):
                stamp = format_utc(moment + timedelta(minutes=7 * i))
                if i % 3 == 1:
                    stamp = stamp[:-1] + ".250000Z"
                if i == UNREADABLE:
                    stamp = stamp[:-1] + ".5Z"
                kind = ("reading", "topup", "reading", "change")[i % 4]
                book.conn.execute(
                    "INSERT INTO entries (id, at_utc, logged_utc, kind, filter, unit, by, dp_bar,"
                    " temp_c, volume_l, reason, note) VALUES (?, ?, ?2, ?, ?, 'P1', 'AB', ?, 48,"
                    " ?, ?, ?)",
                    [
                        entry_id,
                        stamp,
                        kind,
                        None if kind == "topup" else "P1-RF",
                        0.8 + i / 10,
                        4.5 if kind == "topup" else None,
                        "limit" if kind == "change" else None,
                        f"odd id {i}",
                    ],
                )
        book.conn.execute("PRAGMA ignore_check_constraints = OFF")
        text = assert_same(book, None, None, Prefs())
        assert_same(book, datetime(YEAR, 8, 3, 9, 20, tzinfo=UTC), None, Prefs(), status=True)
    ids = [r["id"] for r in csv.DictReader(io.StringIO(text)) if r["note"].startswith("odd id")]
    written = [neutralise(entry_id) for i, entry_id in enumerate(AWKWARD_IDS) if i != UNREADABLE]
    assert ids == written  # as the csv module reads them


@pytest.mark.parametrize("batch", (1, 3))
def test_the_second_query_read_a_few_rows_at_a_time_changes_nothing(plant, monkeypatch, batch):
    # the columns of the entries that are not readings come from a second query in windows
    monkeypatch.setattr("store.exchange.csvexport._OTHER_BATCH", batch)
    monkeypatch.setattr("store.exchange.csvexport._BATCH", 5)  # and the span's rows, five at a time
    plant.set_setting("timezone", "Australia/Lord_Howe")
    assert_same(plant, None, None, Prefs())
    assert_same(plant, datetime(YEAR, 4, 1, tzinfo=UTC), datetime(YEAR, 11, 1, tzinfo=UTC), Prefs())
    assert_same(plant, datetime(YEAR, 6, 1, tzinfo=UTC), None, Prefs(), status=True)


@settings(max_examples=300, deadline=None)
@given(
    st.lists(
        st.uuids().map(str) | st.text(alphabet=st.sampled_from("ab1-=+@'\t\r\n,\"é"), max_size=5),
        min_size=1,
        max_size=8,
    )
)
def test_a_batch_of_ids_is_found_plain_only_when_every_id_is(ids):
    # the reference is the rule for one id (`_plain_cell`), which the byte-for-byte tests
    # above hold to the csv module's writer
    rows = [(entry_id, "2026-01-01T00:00:00Z") for entry_id in ids]
    assert _plain_ids(rows) == all(_plain_cell(entry_id) for entry_id in ids)
