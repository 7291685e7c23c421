"""Field validators for the entry and register forms (Textual `Validator` subclasses).

Each one parses the way the store will parse, so a field that passes here is not refused
later for its own sake (the book may still refuse a combination, and says why).
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Iterable
from datetime import datetime, tzinfo

from textual.validation import ValidationResult, Validator

from store.base import validate as validate_value
from store.base.errors import BookError
from store.base.timeutil import parse_typed_time
from store.base.units import (
    AmbiguousNumberError,
    from_bar,
    from_c,
    from_l,
    parse_pressure_bar,
    parse_temperature_c,
    parse_volume_l,
    pressure_label,
    read_number,
    split_quantity,
    temperature_label,
    volume_label,
)
from store.ledger import journal
from store.ledger.register import normalise_tag
from store.physics.cleanliness import parse_code


class DpValidator(Validator):
    """A ΔP in the user's unit (or with its own: '18 psi'), 0…100 bar."""

    def __init__(self, unit: str) -> None:
        super().__init__()
        self.unit = unit

    def validate(self, value: str) -> ValidationResult:
        try:
            bar = parse_pressure_bar(value, self.unit)
        except AmbiguousNumberError as exc:
            return self.failure(str(exc))
        except BookError:
            return self.failure(f"a number, e.g. 1.2 or 18 psi ({pressure_label(self.unit)})")
        if not 0 <= bar <= journal.MAX_DP_BAR:
            top = from_bar(journal.MAX_DP_BAR, self.unit)
            return self.failure(f"0 to {top:.4g} {pressure_label(self.unit)}")
        return self.success()


class TemperatureValidator(Validator):
    """A fluid temperature in the user's unit (or '113 F'), -40…150 °C."""

    def __init__(self, unit: str) -> None:
        super().__init__()
        self.unit = unit

    def validate(self, value: str) -> ValidationResult:
        try:
            temp_c = parse_temperature_c(value, self.unit)
        except AmbiguousNumberError as exc:
            return self.failure(str(exc))
        except BookError:
            return self.failure(f"a number in {temperature_label(self.unit)}, e.g. 45")
        low, high = journal.TEMP_RANGE_C
        if not low <= temp_c <= high:
            lo, hi = sorted((from_c(low, self.unit), from_c(high, self.unit)))
            return self.failure(f"{lo:.0f} to {hi:.0f} {temperature_label(self.unit)}")
        return self.success()


class TagValidator(Validator):
    """A tag that is in the register (filter, breather, unit, fluid or technician)."""

    def __init__(self, known: Callable[[], Iterable[str]], what: str = "tag") -> None:
        super().__init__()
        self.known = known
        self.what = what

    def validate(self, value: str) -> ValidationResult:
        try:
            tag = normalise_tag(value, self.what)
        except BookError:
            return self.failure(f"not a {self.what}: letters, digits, . - _ /")
        known = {t.upper(): t for t in self.known()}
        if tag in known:
            return self.success()
        close = difflib.get_close_matches(tag, list(known), n=2, cutoff=0.5)
        hint = f": {' or '.join(known[c] for c in close)}?" if close else ""
        return self.failure(f"unknown {self.what} {tag}{hint}")


class NewTagValidator(Validator):
    """A tag for a new register row: well formed and not taken yet."""

    def __init__(self, taken: Callable[[], Iterable[str]], what: str = "tag") -> None:
        super().__init__()
        self.taken = taken
        self.what = what

    def validate(self, value: str) -> ValidationResult:
        try:
            tag = normalise_tag(value, self.what)
        except BookError:
            return self.failure("1-16 letters, digits, . - _ /")
        if tag in {t.upper() for t in self.taken()}:
            return self.failure(f"{tag} is taken")
        return self.success()


class RangeValidator(Validator):
    """A plain number within the store's range for its field (store/base/validate.py RANGES): the
    form says what the book would say, from the same table."""

    def __init__(self, field: str) -> None:
        super().__init__()
        self.field, self.spec = field, validate_value.RANGES[field]

    def validate(self, value: str) -> ValidationResult:
        try:
            number = read_number(value)
        except AmbiguousNumberError as exc:
            return self.failure(str(exc))
        except BookError:
            return self.failure("a whole number" if self.spec.whole else "a number")
        try:
            validate_value.number(self.field, number)
        except BookError as exc:
            whole = "whole" in str(exc)  # in range but not whole (an ISO VG grade)
            return self.failure("a whole number" if whole else self.spec.text())
        return self.success()


class VolumeValidator(Validator):
    """A volume in the user's unit (or '5 gal'), within the store's range for its field."""

    def __init__(self, unit: str, field: str = "volume_l") -> None:
        super().__init__()
        self.unit, self.field = unit, field

    def validate(self, value: str) -> ValidationResult:
        try:
            litres = parse_volume_l(value, self.unit)
        except AmbiguousNumberError as exc:
            return self.failure(str(exc))
        except BookError:
            return self.failure("a number, e.g. 20 or 5 gal")
        try:
            validate_value.number(self.field, litres)
        except BookError:
            spec = validate_value.RANGES[self.field]
            low, high = from_l(spec.low, self.unit), from_l(spec.high, self.unit)
            word = "above" if spec.open_low else "from"
            return self.failure(f"{word} {low:.3g} to {high:.7g} {volume_label(self.unit)}")
        return self.success()


class QuantityValidator(Validator):
    """A number that may carry its own unit, checked by a store parser."""

    def __init__(self, parse: Callable[[str], float], hint: str) -> None:
        super().__init__()
        self.parse, self.hint = parse, hint

    def validate(self, value: str) -> ValidationResult:
        try:
            self.parse(value)
        except AmbiguousNumberError as exc:
            return self.failure(str(exc))
        except BookError:
            return self.failure(self.hint)
        return self.success()


class TimeValidator(Validator):
    """A plant-local time: 07:30 (today, or yesterday if still ahead), yesterday 07:30 or
    2026-05-13 07:30; not more than a day ahead. The failure says the whole reason."""

    def __init__(self, local: tzinfo, now: Callable[[], datetime]) -> None:
        super().__init__()
        self.local, self.now = local, now

    def validate(self, value: str) -> ValidationResult:
        try:
            parse_typed_time(value, self.local, now=self.now())
        except BookError as exc:
            return self.failure(str(exc))
        return self.success()


class CodeValidator(Validator):
    """An ISO 4406 code such as 18/16/13 (or -/16/13)."""

    def validate(self, value: str) -> ValidationResult:
        try:
            parse_code(value)
        except BookError:
            return self.failure("an ISO 4406 code, e.g. 18/16/13")
        return self.success()


class ClockValidator(Validator):
    """A wall-clock time HH:MM."""

    def validate(self, value: str) -> ValidationResult:
        parts = value.strip().split(":")
        ok = len(parts) == 2 and all(p.isdigit() and len(p) == 2 for p in parts)
        if not ok or int(parts[0]) > 23 or int(parts[1]) > 59:
            return self.failure("HH:MM, e.g. 06:00")
        return self.success()


def number_of(text: str, default_unit: str = "") -> float:
    """The number in a field (a comma may stand for the point; store.base.units.read_number)."""
    return split_quantity(text, default_unit or "x")[0]
