"""Time: entries are stored in UTC and shown in the plant's local time.

Shifts are wall-clock patterns ("06:00, 14:00, 22:00") in the plant's time zone;
a shift runs until the next one starts, so it may cross midnight and lasts an hour
more or less on the nights the clocks change (zoneinfo or python-dateutil's tz does the
rules, see `zone`).
"""

from __future__ import annotations

import functools
import re
import zoneinfo
from collections.abc import Sequence
from datetime import UTC, date, datetime, time, timedelta, tzinfo
from typing import TYPE_CHECKING

from store.base.errors import BookError
from store.base.records import frozen_record
from store.base.validate import EARLIEST, one_line, timezone_name

if TYPE_CHECKING:
    from types import ModuleType

UTC_FORMAT = "%Y-%m-%dT%H:%M:%SZ"
MAX_AHEAD = timedelta(days=1)


def utc_now() -> datetime:
    """This computer's clock, UTC, whole seconds (a fixed clock for demos and tests is a
    store.base.session.Session's, handed to the book)."""
    return datetime.now(UTC).replace(microsecond=0)


def _tz() -> ModuleType:
    """python-dateutil's tz, imported on first use: the watch list and status --json read
    stored UTC stamps and the plant's zoneinfo zone, and need none of its rules."""
    from dateutil import tz

    return tz


def parse_iso(text: str) -> datetime:
    """An ISO 8601 time as dateutil reads it (naive stays naive)."""
    return _isoparse(text)


def _isoparse(text: str) -> datetime:
    """dateutil's ISO 8601 parser (it takes more forms than datetime.fromisoformat), imported
    on first use: the watch list and status --json parse no typed times."""
    from dateutil import parser as date_parser

    return date_parser.isoparse(text)


def to_utc(moment: datetime, local: tzinfo, notes: list[str] | None = None) -> datetime:
    """A time as UTC; a naive one is plant-local. A local time the clocks skipped is refused;
    one they passed twice (the hour after clocks go back) is taken at its first passing, and
    `notes` (when given) gets a line saying which offset that was."""
    if moment.year < 1970 or moment.year > 9998:
        raise BookError(f"the year {moment.year:04d} is outside 1970 … 9998: check the year")
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=local)
        if not _tz().datetime_exists(moment):
            raise BookError(
                f"{moment:%Y-%m-%d %H:%M} does not exist in local time (clocks went forward)"
            )
        if _tz().datetime_ambiguous(moment):
            moment = moment.replace(fold=0)
            if notes is not None:
                first = moment.utcoffset()
                second = moment.replace(fold=1).utcoffset()
                notes.append(
                    f"{moment:%Y-%m-%d %H:%M} happens twice here (clocks went back): took the "
                    f"first, UTC{_offset(first)}; for the second give {moment:%H:%M}"
                    f"{_offset(second)}"
                )
    return moment.astimezone(UTC).replace(microsecond=0)


def _offset(delta: timedelta | None) -> str:
    minutes = int((delta or timedelta()).total_seconds() // 60)
    sign = "+" if minutes >= 0 else "-"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def format_utc(moment: datetime) -> str:
    return moment.astimezone(UTC).strftime(UTC_FORMAT)


_STAMP = re.compile(r"(\d{4})-(\d\d)-(\d\d)T(\d\d):(\d\d):(\d\d)(?:\.(\d{6}))?Z", re.ASCII)


def parse_utc(text: str) -> datetime:
    """A stored stamp, 'YYYY-MM-DDTHH:MM:SSZ' (or with six decimals of a second).

    One in exactly that form is built from its digits; anything else, and a stamp whose
    numbers are out of range, goes to strptime, which answers or refuses it as it always has
    (the first strptime loads _strptime and locale, a few ms off the start path)."""
    if (found := _STAMP.fullmatch(text)) is not None:
        try:
            return datetime(*map(int, found.groups("0")), tzinfo=UTC)
        except ValueError:
            pass  # strptime's own refusal follows
    if len(text) == 27 and text[19] == ".":
        return datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=UTC)
    return datetime.strptime(text, UTC_FORMAT).replace(tzinfo=UTC)


def zone(name: str | None) -> tzinfo:
    """The plant's time zone by IANA name; the machine's own zone when unset.

    The standard library's zoneinfo where the system has the time-zone database (its
    conversions are about 15 times quicker, which counts in a year's export), python-dateutil's
    own copy otherwise (Windows without the tzdata package)."""
    if not name:
        return _tz().tzlocal()
    name = _zone_name(name)  # never a path: a stored '../../etc/passwd' is refused
    found = _zoneinfo(name) or _tz().gettz(name)
    if found is None:
        raise BookError(f"unknown time zone '{name}': use an IANA name such as Europe/Berlin")
    return found


@functools.lru_cache(maxsize=32)
def _zone_name(name: str) -> str:
    """`validate.timezone_name`, once per name (the zone is asked for on every read)."""
    return timezone_name(name)


@functools.lru_cache(maxsize=32)
def _zoneinfo(name: str) -> tzinfo | None:
    try:
        return zoneinfo.ZoneInfo(name)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
        return None


def parse_time(
    text: str,
    local: tzinfo,
    now: datetime | None = None,
    allow_future: bool = False,
    notes: list[str] | None = None,
) -> datetime:
    """Any ISO 8601 time (naive means plant-local) -> UTC, from 1970 to a day ahead of `now`
    (`allow_future` lifts the second bound). `notes` gets a line when a local time that
    happens twice was taken at its first passing."""
    shown = one_line(text, 40)
    try:
        moment = _isoparse(text.strip())
    except (ValueError, OverflowError) as exc:
        raise BookError(f"'{shown}' is not an ISO 8601 time (e.g. 2026-05-13T07:30)") from exc
    try:
        result = to_utc(moment, local, notes)
    except (OverflowError, ValueError) as exc:
        if isinstance(exc, BookError):
            raise BookError(f"{shown}: {exc}") from exc
        raise BookError(f"{shown} is outside the times this logbook can hold") from exc
    if result < EARLIEST:
        raise BookError(f"{shown} is before 1970: check the year")
    now = now or utc_now()
    if not allow_future and result > now + MAX_AHEAD:
        raise BookError(
            f"{shown} is more than a day ahead of this computer's clock"
            f" ({now:%Y-%m-%d %H:%M} UTC): check the time or the clock"
        )
    return result


CLOCK_RE = re.compile(r"^(?:(today|yesterday)\s+)?([01]?\d|2[0-3]):([0-5]\d)$", re.IGNORECASE)


@frozen_record
class TypedTime:
    at: datetime  # UTC
    day: str  # "today" or "yesterday" when the date was taken for the person, else ""


def parse_typed_time(text: str, local: tzinfo, now: datetime | None = None) -> TypedTime:
    """A time as a person types it in a form: `HH:MM` (today, or yesterday when today's
    would still be ahead), `today HH:MM`, `yesterday HH:MM`, or a date and time
    (`2026-05-13 07:30`, any ISO 8601). Plant-local unless an offset is given; refuses a time
    more than a day ahead. The message names the whole reason."""
    now = now or utc_now()
    typed = text.strip()
    clock = CLOCK_RE.match(typed)
    if clock is None:
        try:
            moment = _isoparse(typed.replace(" ", "T", 1))
        except (ValueError, OverflowError) as exc:
            raise BookError(
                f"'{typed}' is not a time: type HH:MM, yesterday HH:MM or 2026-05-13 07:30"
            ) from exc
        at, day = to_utc(moment, local), ""
    else:
        word = (clock.group(1) or "").lower()
        today = now.astimezone(local).date()
        wall = time(int(clock.group(2)), int(clock.group(3)))
        at = to_utc(datetime.combine(today, wall), local)
        day = word or "today"
        if word == "yesterday" or (not word and at > now):
            at = to_utc(datetime.combine(today - timedelta(days=1), wall), local)
            day = "yesterday"
    if at > now + MAX_AHEAD:
        raise BookError(
            f"{local_text(at, local)} is more than a day after now "
            f"({local_text(now, local)}): check the time or the clock"
        )
    return TypedTime(at, day)


def local_text(moment: datetime, local: tzinfo, seconds: bool = False) -> str:
    return moment.astimezone(local).strftime("%Y-%m-%d %H:%M:%S" if seconds else "%Y-%m-%d %H:%M")


def iso_local(moment: datetime, local: tzinfo) -> str:
    """ISO 8601 with the local offset, e.g. 2026-03-29T07:00:00+02:00."""
    return moment.astimezone(local).isoformat(timespec="seconds")


@frozen_record
class ShiftSpan:
    name: str
    day: date  # local date on which the shift starts
    start: datetime  # UTC
    end: datetime  # UTC

    @property
    def label(self) -> str:
        return f"{self.day.isoformat()}/{self.name}"

    def holds(self, moment: datetime) -> bool:
        return self.start <= moment < self.end


def _wall(day: date, hhmm: str, local: tzinfo) -> datetime:
    hour, minute = (int(x) for x in hhmm.split(":"))
    moment = datetime.combine(day, time(hour, minute), tzinfo=local)
    # A start inside the spring-forward gap begins at the first valid local minute after it.
    while not _tz().datetime_exists(moment):
        moment = (moment + timedelta(minutes=1)).replace(tzinfo=local)
    return moment.astimezone(UTC)


def _spans_on(day: date, pattern: Sequence[tuple[str, str]], local: tzinfo) -> list[ShiftSpan]:
    ordered = sorted(pattern, key=lambda s: s[1])
    starts = [(_wall(day, hhmm, local), name) for name, hhmm in ordered]
    starts.append((_wall(day + timedelta(days=1), ordered[0][1], local), ordered[0][0]))
    return [ShiftSpan(name, day, s, starts[i + 1][0]) for i, (s, name) in enumerate(starts[:-1])]


def shift_at(moment: datetime, pattern: Sequence[tuple[str, str]], local: tzinfo) -> ShiftSpan:
    """The shift holding `moment` (UTC): pattern is [(name, 'HH:MM'), ...]."""
    if not pattern:
        pattern = [("day", "00:00")]
    day = moment.astimezone(local).date()
    for d in (day, day - timedelta(days=1)):
        for span in _spans_on(d, pattern, local):
            if span.holds(moment):
                return span
    raise BookError("the shift pattern does not cover that time")  # cannot happen: spans tile days


def shift_named(label: str, pattern: Sequence[tuple[str, str]], local: tzinfo) -> ShiftSpan:
    """'2026-05-13/night' -> that shift."""
    try:
        day_text, name = label.split("/", 1)
        day = date.fromisoformat(day_text)
    except ValueError as exc:
        raise BookError(f"'{label}' is not a shift: use YYYY-MM-DD/NAME") from exc
    if not 1970 <= day.year <= 9998:
        raise BookError(f"'{label}': the day must be from 1970 on (and before 9999)")
    for span in _spans_on(day, pattern or [("day", "00:00")], local):
        if span.name.lower() == name.strip().lower():
            return span
    names = ", ".join(n for n, _ in pattern)
    raise BookError(f"no shift named '{name}': the pattern has {names}")


def previous_shift(span: ShiftSpan, pattern: Sequence[tuple[str, str]], local: tzinfo) -> ShiftSpan:
    return shift_at(span.start - timedelta(seconds=1), pattern, local)


def next_shift(span: ShiftSpan, pattern: Sequence[tuple[str, str]], local: tzinfo) -> ShiftSpan:
    return shift_at(span.end, pattern, local)
