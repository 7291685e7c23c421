"""One check per value, used by every door: the CLI, the app's forms (through `journal`
and `register`), CSV import, merge and the plant settings.

Pure functions over plain values: each returns the value as it is to be stored or raises
`BookError` with one plain line. `entry_row_problem` and `register_row_problem` check a raw
row of another file (merge) with the same rules, so nothing enters through a side door that
a person could not have typed. The schema's CHECK constraints (schema V4) are the last line.
"""

from __future__ import annotations

import math
import re
import zoneinfo
from datetime import UTC, datetime, timedelta
from typing import Any

from store.base.errors import BookError
from store.base.records import frozen_record
from store.base.units import AmbiguousNumberError, read_number

# The kinds a book knows; the schema's CHECK constraints are written from these.
FILTER_KINDS = ("suction-strainer", "suction", "pressure", "return", "offline")
INDICATOR_STATES = ("clean", "dirty", "bypass")
ENTRY_KINDS = ("reading", "change", "topup", "breather", "sample", "note", "void")

# ---- numbers --------------------------------------------------------------------------------


@frozen_record
class Range:
    """A field's physical range: `low`..`high` in `unit`; `open_low` refuses `low` itself."""

    label: str
    low: float
    high: float
    unit: str
    open_low: bool = False
    whole: bool = False  # a whole number (ISO VG grade)

    def text(self) -> str:
        unit = f" {self.unit}" if self.unit else ""
        if self.open_low:
            return f"above {self.low:.10g} and up to {self.high:.10g}{unit}"
        return f"{self.low:.10g} … {self.high:.10g}{unit}"


# common practice, no source: the widest values a hydraulic plant's logbook can meet; a value
# outside is a typo (or a unit mix-up), never a reading.
RANGES: dict[str, Range] = {
    # entries
    "dp_bar": Range("ΔP", 0.0, 100.0, "bar"),
    "temp_c": Range("temperature", -40.0, 150.0, "°C"),
    "flow_lpm": Range("flow", 0.0, 100_000.0, "L/min", open_low=True),
    "hours": Range("hour meter", 0.0, 10_000_000.0, "h"),
    "volume_l": Range("volume", 0.01, 100_000.0, "L"),
    "filtered_um": Range("filtered rating", 0.1, 1000.0, "µm"),
    "c4_per_ml": Range("≥4 µm(c) count", 0.0, 1e9, "/mL"),
    "c6_per_ml": Range("≥6 µm(c) count", 0.0, 1e9, "/mL"),
    "c14_per_ml": Range("≥14 µm(c) count", 0.0, 1e9, "/mL"),
    "water_ppm": Range("water", 0.0, 1_000_000.0, "ppm"),
    # register: fluids (ISO 3448 grades run VG 2 … VG 3200)
    "iso_vg": Range("ISO VG grade", 2, 3200, "", whole=True),
    "nu40_cst": Range("ν40", 0.0, 5000.0, "mm²/s", open_low=True),
    "nu100_cst": Range("ν100", 0.0, 1000.0, "mm²/s", open_low=True),
    "vi": Range("viscosity index", -200.0, 500.0, ""),
    "density_kg_l": Range("density", 0.5, 2.5, "kg/L"),
    # register: units
    "reservoir_l": Range("reservoir", 0.0, 1_000_000.0, "L", open_low=True),
    "normal_temp_c": Range("normal temperature", -40.0, 150.0, "°C"),
    "max_temp_c": Range("temperature limit", -40.0, 150.0, "°C"),
    "coldest_start_c": Range("coldest start", -40.0, 150.0, "°C"),
    # register: filters and breathers
    "rating_um": Range("rating", 0.0, 1000.0, "µm", open_low=True),
    "beta_ratio": Range("beta ratio", 1.0, 1_000_000.0, ""),
    "bypass_bar": Range("bypass setting", 0.0, 100.0, "bar", open_low=True),
    "limit_bar": Range("change limit", 0.0, 100.0, "bar", open_low=True),
    "clean_bar": Range("clean-element ΔP", 0.0, 100.0, "bar"),
    "rated_flow_lpm": Range("rated flow", 0.0, 100_000.0, "L/min", open_low=True),
    "normal_flow_lpm": Range("normal flow", 0.0, 100_000.0, "L/min", open_low=True),
    "reading_interval_h": Range("reading interval", 0.0, 17_520.0, "h", open_low=True),
    "swap_interval_d": Range("swap interval", 0.0, 3650.0, "days", open_low=True),
}


def number(field: str, value: Any) -> float | int | None:
    """A field's value checked against its range (None passes: not given)."""
    if value is None:
        return None
    spec = RANGES[field]
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise BookError(f"{spec.label} must be a number")
    if not math.isfinite(value):
        raise BookError(f"{spec.label} must be a finite number: {spec.text()}")
    if spec.whole and value != int(value):
        raise BookError(f"{spec.label} must be a whole number")
    too_low = value <= spec.low if spec.open_low else value < spec.low
    if too_low or value > spec.high:
        unit = f" {spec.unit}" if spec.unit else ""
        raise BookError(f"{spec.label} {value:.12g}{unit} is outside its range, {spec.text()}")
    return int(value) if spec.whole else value


def parse_number(field: str, text: str) -> float:
    """Typed text -> a number in range (units.read_number: '1,5' is 1.5, '1,250' is asked
    about); 'inf', 'nan' and words are refused."""
    spec = RANGES[field]
    try:
        value = read_number(text)
    except AmbiguousNumberError as exc:
        raise BookError(f"{spec.label} {exc}") from None
    except BookError:
        raise BookError(f"{spec.label} '{one_line(text, 30)}' is not a number") from None
    return number(field, value)  # type: ignore[return-value]


# ---- text ----------------------------------------------------------------------------------

MAX_NOTE_CHARS = 2000
# Longest text per register or entry field (a tag has its own rule).
TEXT_LIMITS = {
    "note": MAX_NOTE_CHARS,
    "condition": 200,
    "batch": 60,
    "name": 80,
    "area": 80,
    "element": 60,
    "plant name": 80,
    "reason": 20,
    "code": 20,
}
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\ud800-\udfff]")
_CONTROL_ONE_LINE = re.compile("[\x00-\x1f\x7f-\x9f\ud800-\udfff]")


def text(field: str, value: Any, limit: int | None = None, multiline: bool = False) -> str:
    """Text as stored: trimmed, within its length, no control or escape characters
    (C0, DEL, C1; a note may hold line breaks and tabs; CR LF and CR become LF)."""
    if value is None:
        value = ""
    if not isinstance(value, str):
        raise BookError(f"{field} must be text")
    if multiline:
        value = value.replace("\r\n", "\n").replace("\r", "\n")
    value = value.strip()
    limit = limit if limit is not None else TEXT_LIMITS.get(field, 200)
    if len(value) > limit:
        raise BookError(f"{field} is longer than {limit} characters ({len(value)})")
    found = (_CONTROL if multiline else _CONTROL_ONE_LINE).search(value)
    if found:
        ch = found.group()
        if "\ud800" <= ch <= "\udfff":
            raise BookError(f"{field} holds characters that are not text (a wrong encoding?)")
        raise BookError(f"{field} holds a control character (U+{ord(ch):04X})")
    return value


def one_line(value: str, limit: int = 200) -> str:
    """Text quoted in a message: one short printable line."""
    flat = "".join(ch if ch.isprintable() else " " for ch in str(value))
    return flat if len(flat) <= limit else flat[: limit - 1] + "…"


# ---- tags ----------------------------------------------------------------------------------

TAG_RE = re.compile(r"^[A-Z0-9][A-Z0-9._/-]{0,15}$")


def tag(value: Any, what: str = "tag") -> str:
    """A register tag as stored: upper case, 1-16 letters, digits, '.', '-', '_' or '/'."""
    clean = value.strip().upper() if isinstance(value, str) else ""
    if not TAG_RE.match(clean):
        raise BookError(
            f"'{one_line(str(value), 40)}' is not a usable {what}: 1-16 letters, digits, '.', "
            "'-', '_' or '/', starting with a letter or digit"
        )
    return clean


def is_tag(value: Any) -> bool:
    return isinstance(value, str) and bool(TAG_RE.match(value.upper())) and value == value.strip()


# ---- time ----------------------------------------------------------------------------------

EARLIEST = datetime(1970, 1, 1, tzinfo=UTC)
AHEAD = timedelta(days=1)
_STAMP_RE = re.compile(r"^(\d{4})-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d{6})?Z$")


def moment(value: datetime, now: datetime, what: str = "the time") -> datetime:
    """A UTC time inside the book's window: from 1970-01-01 to one day ahead of its clock."""
    if value < EARLIEST:
        raise BookError(f"{what} {value:%Y-%m-%d} is before 1970: check the year")
    if value > now + AHEAD:
        raise BookError(
            f"{what} is more than a day ahead of this computer's clock "
            f"({now:%Y-%m-%d %H:%M} UTC): check the time or the clock"
        )
    return value


def stamp_problem(value: Any) -> str | None:
    """What is wrong with a stored UTC stamp ('YYYY-MM-DDTHH:MM:SS(.ffffff)?Z', 1970 on), or
    None."""
    if not isinstance(value, str):
        return "the time is not text"
    found = _STAMP_RE.match(value)
    if not found:
        return f"'{one_line(value, 40)}' is not a UTC time like 2026-05-13T07:30:00Z"
    try:
        datetime.fromisoformat(value[:19])
    except ValueError:
        return f"'{value}' is not a real date and time"
    if int(found.group(1)) < 1970:
        return f"'{value}' is before 1970"
    return None


# ---- plant settings ------------------------------------------------------------------------

_ZONE_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_+\-]*(/[A-Za-z0-9_+\-]+){0,2}$")


def timezone_name(name: Any) -> str:
    """An IANA time-zone name the system (or python-dateutil) knows; never a path."""
    clean = name.strip() if isinstance(name, str) else ""
    if len(clean) <= 64 and _ZONE_RE.match(clean):
        try:
            zoneinfo.ZoneInfo(clean)
            return clean
        except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
            from dateutil import tz  # deferred: only a zone zoneinfo does not know needs it

            if tz.gettz(clean) is not None:
                return clean
    raise BookError(
        f"unknown time zone '{one_line(str(name), 40)}': use an IANA name such as Europe/Berlin"
    )


def plant_setting(key: str, value: str) -> str:
    """A plant setting (name, timezone, backup_keep) checked as the book will store it."""
    if key == "name":
        return text("plant name", value)
    if key == "timezone":
        return timezone_name(value)
    if key == "backup_keep":
        clean = (value or "").strip()
        if not (clean.isdigit() and 1 <= int(clean) <= 1000):
            raise BookError("backup_keep must be a whole number from 1 to 1000")
        return str(int(clean))
    raise BookError(
        f"unknown plant setting '{one_line(key, 30)}': use name, timezone or backup_keep"
    )


# ---- whole rows (merge, the last look before a raw row is copied) -------------------------

ENTRY_NUMBERS = (
    "dp_bar",
    "temp_c",
    "flow_lpm",
    "hours",
    "volume_l",
    "filtered_um",
    "c4_per_ml",
    "c6_per_ml",
    "c14_per_ml",
    "water_ppm",
)
ENTRY_TEXTS = {"reason": 20, "condition": 200, "batch": 60, "code": 20, "indicator": 10}
ENTRY_TAGS = ("by", "unit", "filter", "breather", "fluid")
CHANGE_REASONS = ("limit", "indicator", "interval", "bypass", "damage", "other")
BREATHER_REASONS = ("interval", "spent", "damage", "other")
# What each kind must have, and the reasons it may give.
_KIND_NEEDS = {
    "reading": ("filter",),
    "change": ("filter",),
    "breather": ("breather",),
    "topup": ("unit", "volume_l"),
    "sample": ("unit",),
    "void": ("voids",),
}
_KIND_REASONS = {"change": CHANGE_REASONS, "breather": BREATHER_REASONS}


def voidable(value: Any) -> bool:
    """Whether a void can name an entry of this id (one the book writes: `entry_id`)."""
    try:
        entry_id(value)
    except BookError:
        return False
    return True


def entry_id(value: Any) -> str:
    """An entry id as the book writes them: a UUID in its 36-character lower-case form."""
    if isinstance(value, str) and len(value) == 36:
        try:
            import uuid  # only an id given by hand is checked (kept off the lean path)

            if str(uuid.UUID(value)) == value:
                return value
        except ValueError:
            pass
    raise BookError(f"id '{one_line(str(value), 40)}' is not an entry id (a UUID)")


def entry_row_problem(row: dict[str, Any]) -> str | None:
    """Why a raw `entries` row (another book's) could not have been typed here, or None."""
    try:
        entry_id(row.get("id"))
        if row.get("kind") not in ENTRY_KINDS:
            return f"kind '{one_line(str(row.get('kind')), 20)}' is unknown"
        for column in ("at_utc", "logged_utc"):
            problem = stamp_problem(row.get(column))
            if problem:
                return f"{column}: {problem}"
        for column in ENTRY_NUMBERS:
            number(column, row.get(column))
        for column in ENTRY_TAGS:
            value = row.get(column)
            if value is not None and not is_tag(value):
                tag(value, column)
        if not row.get("by"):
            return "it names no technician"
        if text("note", row.get("note"), multiline=True) != row.get("note"):
            return "the note is not as sumpbook stores notes (spaces around it, or CR)"
        for column, limit in ENTRY_TEXTS.items():
            if row.get(column) is not None and text(column, row[column], limit) != row[column]:
                return f"{column} is not as sumpbook stores it (spaces around it)"
        if row.get("indicator") is not None and row["indicator"] not in INDICATOR_STATES:
            return f"indicator '{one_line(str(row['indicator']), 20)}' is unknown"
        if row.get("voids") is not None:
            entry_id(row["voids"])
        kind = row["kind"]
        for column in _KIND_NEEDS.get(kind, ()):
            if row.get(column) is None:
                return f"a {kind} without {column}"
        if kind in _KIND_REASONS and row.get("reason") not in _KIND_REASONS[kind]:
            return f"{kind} reason '{one_line(str(row.get('reason')), 20)}' is unknown"
        if kind == "reading" and row.get("dp_bar") is None and row.get("indicator") is None:
            return "a reading with neither ΔP nor indicator"
        if kind == "void" and not (row.get("note") or "").strip():
            return "a void that says no reason"
    except BookError as exc:
        return str(exc)
    return None


REGISTER_TEXTS = {"name": 80, "area": 80, "element": 60, "target_code": 20}
SHIFT_NAME_RE = re.compile(r"^\w[\w-]{0,11}$")
SHIFT_START_RE = re.compile(r"^([01]\d|2[0-3]):[0-5]\d$")


def shift(name: Any, starts: Any) -> tuple[str, str]:
    """A shift of the pattern: a name of 1-12 letters or digits, a start 'HH:MM'."""
    clean = name.strip() if isinstance(name, str) else ""
    if not SHIFT_NAME_RE.match(clean):
        raise BookError(
            f"'{one_line(str(name), 20)}' is not a usable shift name (1-12 letters or digits)"
        )
    start = starts.strip() if isinstance(starts, str) else ""
    if not SHIFT_START_RE.match(start):
        raise BookError(f"shift start '{one_line(str(starts), 20)}' must be HH:MM (00:00-23:59)")
    return clean, start


def register_log_problem(row: dict[str, Any]) -> str | None:
    """Why a raw register_log row (another book's) could not have been written here, or None."""
    try:
        entry_id(row.get("id"))
        problem = stamp_problem(row.get("at_utc"))
        if problem:
            return problem
        for column in ("by", "tbl", "tag", "field"):
            text(column, row.get(column), 40)
        for column in ("old", "new"):
            if row.get(column) is not None:
                text(column, row[column], 400)
    except BookError as exc:
        return str(exc)
    return None


def register_row_problem(table: str, row: dict[str, Any]) -> str | None:
    """Why a raw register row (another book's) could not have been typed here, or None."""
    try:
        tag(row.get("tag"))
        if not is_tag(row.get("tag")):
            return f"tag '{one_line(str(row.get('tag')), 20)}' is not upper case"
        for column, value in row.items():
            if column in RANGES:
                number(column, value)
            elif column in REGISTER_TEXTS and value is not None:
                text(column, value, REGISTER_TEXTS[column])
            elif column in ("unit", "fluid") and value is not None:
                tag(value, column)
            elif column in ("active", "hour_meter", "gauge") and value not in (0, 1):
                return f"{column} must be 0 or 1"
    except BookError as exc:
        return str(exc)
    return None
