"""Time: entries around daylight-saving changes and across midnight land in the right shift;
an entry far in the future (a clock set wrong) is refused.

Transition dates: EU Directive 2000/84/EC (summer time from 01:00 UTC on the last Sunday of
March to 01:00 UTC on the last Sunday of October: 2026-03-29 and 2026-10-25) and the US
Energy Policy Act of 2005 (02:00 local on the second Sunday of March and the first Sunday of
November: 2026-03-08 and 2026-11-01). Expected instants are cross-checked with the standard
library's zoneinfo (IANA tz database), independent of python-dateutil used by the book.
"""

from __future__ import annotations

import csv
import io
from datetime import UTC, datetime, timedelta
from zoneinfo import ZoneInfo

import pytest

from store import record
from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.session import fixed_clock
from store.base.timeutil import parse_time, parse_utc, shift_at, shift_named, zone
from store.exchange.csvexport import write_span
from store.exchange.csvio import import_csv
from store.ledger import journal
from store.ledger.entries import Note, Reading

BERLIN = "Europe/Berlin"
CHICAGO = "America/Chicago"
THREE_EIGHTS = [("early", "06:00"), ("late", "14:00"), ("night", "22:00")]
TWO_TWELVES = [("day", "07:00"), ("night", "19:00")]
NOW = datetime(2026, 11, 20, 12, 0, tzinfo=UTC)


def wall(zone_name: str, *args: int, fold: int = 0) -> datetime:
    """A local wall-clock time as a UTC instant, by zoneinfo (the cross-check)."""
    return datetime(*args, tzinfo=ZoneInfo(zone_name), fold=fold).astimezone(UTC)


@pytest.mark.parametrize(
    ("zone_name", "pattern", "label", "start", "end", "hours"),
    [
        # EU Directive 2000/84/EC: spring forward, the night 28→29 March 2026 loses an hour
        (BERLIN, THREE_EIGHTS, "2026-03-28/night", (2026, 3, 28, 22), (2026, 3, 29, 6), 7),
        # EU Directive 2000/84/EC: fall back, the night 24→25 October 2026 gains an hour
        (BERLIN, THREE_EIGHTS, "2026-10-24/night", (2026, 10, 24, 22), (2026, 10, 25, 6), 9),
        (BERLIN, THREE_EIGHTS, "2026-03-29/early", (2026, 3, 29, 6), (2026, 3, 29, 14), 8),
        # US Energy Policy Act of 2005: 12-hour nights across 8 March and 1 November 2026
        (CHICAGO, TWO_TWELVES, "2026-03-07/night", (2026, 3, 7, 19), (2026, 3, 8, 7), 11),
        (CHICAGO, TWO_TWELVES, "2026-10-31/night", (2026, 10, 31, 19), (2026, 11, 1, 7), 13),
    ],
)
def test_shifts_across_clock_changes_have_the_right_ends(
    zone_name, pattern, label, start, end, hours
):
    local = zone(zone_name)
    span = shift_named(label, pattern, local)
    assert span.start == wall(zone_name, *start)
    assert span.end == wall(zone_name, *end)
    assert span.end - span.start == timedelta(hours=hours)
    # Every minute-ish inside lands in this shift; the instants either side do not.
    moment = span.start
    while moment < span.end:
        assert shift_at(moment, pattern, local).label == label
        moment += timedelta(minutes=17)
    assert shift_at(span.start - timedelta(seconds=1), pattern, local).label != label
    assert shift_at(span.end, pattern, local).label != label


def test_both_occurrences_of_the_repeated_hour_are_the_same_night():
    local = zone(BERLIN)
    first = parse_time("2026-10-25T02:30+02:00", local, now=NOW)
    second = parse_time("2026-10-25T02:30+01:00", local, now=NOW)
    assert second - first == timedelta(hours=1)
    assert first == wall(BERLIN, 2026, 10, 25, 2, 30, fold=0)
    assert second == wall(BERLIN, 2026, 10, 25, 2, 30, fold=1)
    for moment in (first, second):
        assert shift_at(moment, THREE_EIGHTS, local).label == "2026-10-24/night"
    # Written without an offset, the wall time is read as its first occurrence (fold=0).
    assert parse_time("2026-10-25T02:30", local, now=NOW) == first


def test_a_wall_time_that_never_happened_is_refused():
    with pytest.raises(BookError, match="does not exist"):
        parse_time("2026-03-29T02:30", zone(BERLIN), now=NOW)


def test_a_shift_starting_inside_the_gap_begins_when_the_clock_resumes():
    local = zone(BERLIN)
    pattern = [("a", "02:30"), ("b", "14:30")]
    span = shift_named("2026-03-29/a", pattern, local)
    assert span.start == wall(BERLIN, 2026, 3, 29, 3, 0)  # first valid local minute after 02:00


@pytest.mark.parametrize(
    ("local_text", "label"),
    [
        ("2026-03-28T21:59", "2026-03-28/late"),
        ("2026-03-28T22:00", "2026-03-28/night"),
        ("2026-03-28T23:59", "2026-03-28/night"),
        ("2026-03-29T00:01", "2026-03-28/night"),  # after midnight: still the night before
        ("2026-03-29T01:59", "2026-03-28/night"),
        ("2026-03-29T03:00", "2026-03-28/night"),  # first minute after the gap
        ("2026-03-29T05:59", "2026-03-28/night"),
        ("2026-03-29T06:00", "2026-03-29/early"),
        ("2026-10-25T01:30", "2026-10-24/night"),
        ("2026-10-25T05:59", "2026-10-24/night"),
        ("2026-10-25T06:00", "2026-10-25/early"),
    ],
)
def test_logged_entries_land_in_their_shift(book, monkeypatch, local_text, label):
    book.set_setting("timezone", BERLIN)
    book.clock = fixed_clock(NOW)
    at = parse_time(local_text, book.local_zone(), now=book.now())
    saved = record.log(book, Reading(filter="P1-RF", dp_bar=1.0, at=at, by="AB"))
    stored = journal.find_entry(book, saved.id)
    assert stored.at == wall(
        BERLIN, *map(int, local_text.replace("T", "-").replace(":", "-").split("-"))
    )
    assert shift_at(stored.at, book.shift_pattern(), book.local_zone()).label == label


def test_export_names_the_shift_and_the_offset_across_the_change(book, monkeypatch):
    book.set_setting("timezone", BERLIN)
    book.clock = fixed_clock(NOW)
    instants = {
        wall(BERLIN, 2026, 3, 28, 23, 0): ("night", "2026-03-28T23:00:00+01:00"),
        wall(BERLIN, 2026, 3, 29, 3, 30): ("night", "2026-03-29T03:30:00+02:00"),
        wall(BERLIN, 2026, 3, 29, 6, 30): ("early", "2026-03-29T06:30:00+02:00"),
    }
    for at in instants:
        record.log(book, Note(unit="P1", note="round", at=at, by="AB"))
    out = io.StringIO()
    write_span(out, book, None, None, Prefs(), book.local_zone(), book.shift_pattern())
    rows = list(csv.DictReader(io.StringIO(out.getvalue())))
    assert [(r["shift"], r["time"]) for r in rows] == list(instants.values())


def test_an_entry_far_in_the_future_is_refused(book, monkeypatch):
    book.clock = fixed_clock(NOW)
    before = book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    # MAX_AHEAD is one day: a clock slip of hours passes, days do not. # common practice, no source
    record.log(book, Note(unit="P1", note="ok", at=NOW + timedelta(hours=23), by="AB"))
    for ahead in (timedelta(days=2), timedelta(days=400)):
        with pytest.raises(BookError, match="ahead"):
            record.log(book, Note(unit="P1", note="clock?", at=NOW + ahead, by="AB"))
        with pytest.raises(BookError, match="ahead"):
            parse_time((NOW + ahead).isoformat(), zone(BERLIN), now=NOW)
    assert book.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == before + 1


def test_a_csv_row_from_the_future_rejects_the_import_with_its_line(book, monkeypatch):
    book.clock = fixed_clock(NOW)
    data = (
        b"time,kind,target,by,note\n"
        b"2026-11-20T08:00+01:00,note,P1,AB,fine\n"
        b"2027-11-20T08:00+01:00,note,P1,AB,a year ahead\n"
    )
    with pytest.raises(BookError, match="line 3: .*ahead"):
        import_csv(book, data, zone(BERLIN))
    assert book.conn.execute("SELECT count(*) FROM entries").fetchone()[0] == 0


def test_a_bare_clock_is_today_or_yesterday_when_still_ahead():
    from store.base.timeutil import parse_typed_time

    local = zone(BERLIN)
    now = datetime(2026, 5, 13, 10, 0, tzinfo=UTC)  # 12:00 in Berlin (CEST, UTC+2)
    early = parse_typed_time("07:30", local, now=now)
    assert (early.at, early.day) == (wall(BERLIN, 2026, 5, 13, 7, 30), "today")
    late = parse_typed_time("13:00", local, now=now)  # today's 13:00 is still ahead
    assert (late.at, late.day) == (wall(BERLIN, 2026, 5, 12, 13, 0), "yesterday")
    said = parse_typed_time("Yesterday 7:05", local, now=now)
    assert (said.at, said.day) == (wall(BERLIN, 2026, 5, 12, 7, 5), "yesterday")
    dated = parse_typed_time("2026-05-12 07:05", local, now=now)
    assert (dated.at, dated.day) == (wall(BERLIN, 2026, 5, 12, 7, 5), "")
    # 02:30 on 2026-03-29 does not exist in Berlin (EU Directive 2000/84/EC)
    with pytest.raises(BookError, match="does not exist"):
        parse_typed_time("02:30", local, now=datetime(2026, 3, 29, 9, 0, tzinfo=UTC))
    with pytest.raises(BookError, match=r"more than a day after now \(2026-05-13 12:00\)"):
        parse_typed_time("2026-05-15 08:00", local, now=now)
    with pytest.raises(BookError, match="'24:10' is not a time: type HH:MM"):
        parse_typed_time("24:10", local, now=now)


def test_parse_utc_answers_as_strptime_does():
    """A stored stamp in its one form is built from its digits (no strptime on the start
    path); every answer and every refusal is strptime's (Python's standard library, the
    reference here), on stamps in range and out of it, in other forms and other digits."""
    import random

    def by_strptime(text: str) -> tuple[str, object]:
        try:
            if len(text) == 27 and text[19] == ".":
                found = datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ")
            else:
                found = datetime.strptime(text, "%Y-%m-%dT%H:%M:%SZ")
        except ValueError as exc:
            return "refused", str(exc)
        return "read", found.replace(tzinfo=UTC)

    def by_parse_utc(text: str) -> tuple[str, object]:
        try:
            return "read", parse_utc(text)
        except ValueError as exc:
            return "refused", str(exc)

    rng = random.Random(21)
    stamps = [
        "2026-06-01T04:00:00Z",
        "2026-06-01T04:00:00.123456Z",
        "2026-02-30T00:00:00Z",
        "0000-01-01T00:00:00Z",
        "2026-06-01T24:00:00Z",
        "2026-06-01T23:59:60Z",
        "2026-06-01t04:00:00z",
        "2026-6-01T04:00:00Z",
        "2026-06-01T04:00:00.12Z",
        "\u0662\u0660\u0662\u0666-06-01T04:00:00Z",  # Arabic-Indic digits: strptime reads them
        "2026-06-01T04:00:00",
        "9999-12-31T23:59:59.999999Z",
    ]
    for _ in range(3000):
        stamp = (
            f"{rng.randint(0, 9999):04d}-{rng.randint(0, 14):02d}-{rng.randint(0, 32):02d}"
            f"T{rng.randint(0, 25):02d}:{rng.randint(0, 61):02d}:{rng.randint(0, 62):02d}"
        )
        if rng.random() < 0.3:
            stamp += f".{rng.randint(0, 999_999):06d}"
        stamps.append(stamp + "Z")
    assert [by_parse_utc(s) for s in stamps] == [by_strptime(s) for s in stamps]
    assert by_parse_utc(stamps[0]) == ("read", datetime(2026, 6, 1, 4, tzinfo=UTC))
