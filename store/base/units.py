"""Units of measure at the edges: the book stores bar, °C, L and mm²/s.

Factors: NIST SP 811 (2008) Appendix B.8, with the exact definitions behind it
(1 lb = 0.45359237 kg, g_n = 9.80665 m/s², 1 in = 0.0254 m, 1 US gal = 231 in³,
1 bar = 1e5 Pa). Cross-checked against pint in tests/store/test_units.py.
"""

from __future__ import annotations

import re

from store.base.errors import BookError

PA_PER_PSI = 0.45359237 * 9.80665 / 0.0254**2  # 6894.757293168361 Pa, exact
PA_PER_BAR = 1e5
L_PER_US_GAL = 231 * 0.0254**3 * 1000  # 3.785411784 L, exact

_BAR_PER = {"bar": 1.0, "psi": PA_PER_PSI / PA_PER_BAR, "kpa": 1e3 / PA_PER_BAR}
_L_PER = {"l": 1.0, "gal": L_PER_US_GAL}

PRESSURE_UNITS = ("bar", "psi", "kPa")
TEMPERATURE_UNITS = ("C", "F")
VOLUME_UNITS = ("L", "gal")

PRESSURE_LABEL = {"bar": "bar", "psi": "psi", "kpa": "kPa"}
TEMPERATURE_LABEL = {"c": "°C", "f": "°F"}
VOLUME_LABEL = {"l": "L", "gal": "gal"}


class UnitError(BookError):
    """An unknown unit of measure or a value that is not a number."""


def _key(unit: str, table: dict, kind: str, choices: tuple[str, ...]) -> str:
    key = unit.strip().lower().replace("°", "").replace(" ", "")
    if key in table:  # each quantity only its own units: kPa is no temperature
        return key
    aliases = {
        "degc": "c",
        "celsius": "c",
        "degf": "f",
        "fahrenheit": "f",
        "litre": "l",
        "liter": "l",
        "litres": "l",
        "liters": "l",
        "usgal": "gal",
        "gallon": "gal",
        "gallons": "gal",
    }
    if aliases.get(key) in table:
        return aliases[key]
    raise UnitError(f"unknown {kind} unit '{unit}': use one of {', '.join(choices)}")


def pressure_key(unit: str) -> str:
    return _key(unit, _BAR_PER, "pressure", PRESSURE_UNITS)


def temperature_key(unit: str) -> str:
    return _key(unit, {"c": 1, "f": 1}, "temperature", TEMPERATURE_UNITS)


def volume_key(unit: str) -> str:
    return _key(unit, _L_PER, "volume", VOLUME_UNITS)


def to_bar(value: float, unit: str) -> float:
    return value * _BAR_PER[pressure_key(unit)]


def from_bar(value_bar: float, unit: str) -> float:
    return value_bar / _BAR_PER[pressure_key(unit)]


def to_c(value: float, unit: str) -> float:
    return value if temperature_key(unit) == "c" else (value - 32.0) / 1.8


def from_c(value_c: float, unit: str) -> float:
    return value_c if temperature_key(unit) == "c" else value_c * 1.8 + 32.0


def to_l(value: float, unit: str) -> float:
    return value * _L_PER[volume_key(unit)]


def from_l(value_l: float, unit: str) -> float:
    return value_l / _L_PER[volume_key(unit)]


_NUMBER = r"[-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?"
# A unit starts with a letter or a degree sign: '1..3' is no number with the unit '.3'.
_NUMBER_WITH_UNIT = re.compile(rf"^\s*({_NUMBER})\s*((?:[^\W\d_]|°).*)?$")
# '1,250' is 1.25 where the comma is the decimal sign and 1250 where it groups thousands.
_AMBIGUOUS_COMMA = re.compile(r"^([-+]?[1-9]\d{0,2}),(\d{3})$")


class AmbiguousNumberError(UnitError):
    """A typed number that reads two ways ('1,250': 1.25 or 1250)."""


def read_number(text: str) -> float:
    """The one reading of a typed number, for every door a person types at (forms, CLI).

    A comma may stand for the decimal point ('12,5' is 12.5); a comma with exactly three
    digits after it and no other sign ('1,250') could be a thousands separator, so it is
    refused with a question rather than read either way. Words, 'inf' and 'nan' are refused.
    A typed '-0' is zero (never a negative zero, shown and kept as '-0.00').
    """
    t = (text or "").strip()
    both = _AMBIGUOUS_COMMA.match(t)
    if both:
        point, whole = f"{both.group(1)}.{both.group(2)}", both.group(1) + both.group(2)
        raise AmbiguousNumberError(
            f"'{t}' reads two ways: {float(point):g} or {int(whole)}? Type the one you mean"
        )
    if not re.fullmatch(_NUMBER, t):
        raise UnitError(f"'{text}' is not a number")
    return float(t.replace(",", ".")) + 0.0  # IEEE 754: -0 + 0 is +0


def split_quantity(text: str, default_unit: str) -> tuple[float, str]:
    """'18 psi' -> (18.0, 'psi'); '1,2' -> (1.2, default). A comma may stand for the point
    (read_number: '1,250' is refused as ambiguous)."""
    match = _NUMBER_WITH_UNIT.match(text or "")
    if not match:
        raise UnitError(f"'{(text or '').strip()}' is not a number")
    number = read_number(match.group(1))
    return number, (match.group(2) or default_unit).strip()


def parse_pressure_bar(text: str, default_unit: str = "bar") -> float:
    value, unit = split_quantity(text, default_unit)
    return to_bar(value, unit)


def parse_temperature_c(text: str, default_unit: str = "C") -> float:
    value, unit = split_quantity(text, default_unit)
    return to_c(value, unit)


def parse_volume_l(text: str, default_unit: str = "L") -> float:
    value, unit = split_quantity(text, default_unit)
    return to_l(value, unit)


def pressure_label(unit: str) -> str:
    return PRESSURE_LABEL[pressure_key(unit)]


def temperature_label(unit: str) -> str:
    return TEMPERATURE_LABEL[temperature_key(unit)]


def volume_label(unit: str) -> str:
    return VOLUME_LABEL[volume_key(unit)]
