"""Unit conversions at the edges, checked against pint (an independent units library)."""

import math

import pint
import pytest
from hypothesis import given
from hypothesis import strategies as st

from store.base import units
from store.base.errors import BookError

ureg = pint.UnitRegistry()


def test_psi_factor_matches_nist_and_pint():
    # NIST SP 811 (2008) App. B.8: 1 psi = 6.894757 E+03 Pa; exact from lb, g_n, inch
    assert units.PA_PER_PSI == pytest.approx(6894.757, abs=5e-4)
    assert units.PA_PER_PSI == pytest.approx(ureg.Quantity(1, "psi").to("Pa").magnitude, rel=1e-12)


def test_bar_kpa_and_gallon_against_pint():
    # pint: bar = 1e5 Pa; US gallon = 231 in³ (REFERENCES.md §5)
    assert units.to_bar(14.503773773, "psi") == pytest.approx(1.0, rel=1e-9)
    assert units.to_bar(100, "kPa") == pytest.approx(ureg.Quantity(100, "kPa").to("bar").magnitude)
    assert units.to_l(1, "gal") == pytest.approx(
        ureg.Quantity(1, "gallon").to("L").magnitude, rel=1e-12
    )
    assert units.L_PER_US_GAL == pytest.approx(3.785411784, rel=1e-12)  # NIST SP 811 App. B


@pytest.mark.parametrize(("f", "c"), [(212, 100), (-40, -40), (32, 0)])
def test_fahrenheit_fixed_points(f, c):
    # NIST SP 811 App. B: t/°C = (t/°F − 32)/1.8; fixed points checked with pint
    assert units.to_c(f, "F") == pytest.approx(c)
    assert units.to_c(f, "F") == pytest.approx(ureg.Quantity(f, ureg.degF).to("degC").magnitude)


@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False))
def test_round_trips(value):
    for unit in units.PRESSURE_UNITS:
        assert units.from_bar(units.to_bar(value, unit), unit) == pytest.approx(value, abs=1e-9)
    for unit in units.TEMPERATURE_UNITS:
        assert units.from_c(units.to_c(value, unit), unit) == pytest.approx(value, abs=1e-6)
    for unit in units.VOLUME_UNITS:
        assert units.from_l(units.to_l(value, unit), unit) == pytest.approx(value, abs=1e-9)


def test_quantity_text():
    assert units.parse_pressure_bar("18 psi") == pytest.approx(18 * 0.0689475729317)
    assert units.parse_pressure_bar("1,5") == 1.5  # a comma is a decimal point here
    assert units.parse_temperature_c("113F") == pytest.approx(45.0)
    assert units.parse_volume_l("5 gal") == pytest.approx(5 * 3.785411784)


@pytest.mark.parametrize("text", ["", "abc", "1.2 furlongs", "psi"])
def test_bad_quantities_say_so(text):
    with pytest.raises(BookError):
        units.parse_pressure_bar(text)


def test_one_reading_of_a_typed_number_for_every_door():
    # issue 23: a decimal comma is read as the point, except where it could group thousands
    from store.base.units import AmbiguousNumberError, read_number

    for text, value in [("12,5", 12.5), ("1.250", 1.25), ("0,250", 0.25), (",5", 0.5), ("7", 7)]:
        assert read_number(text) == value, text
    for text in ("1,250", "12,500", "-3,000"):
        with pytest.raises(AmbiguousNumberError, match="reads two ways"):
            read_number(text)
    # IEEE 754-2008 §6.3 (-0 + +0 is +0 in round-to-nearest): a typed "-0" is plain zero
    for text in ("-0", "-0,0", "-0.00", "-0e5"):
        assert math.copysign(1.0, read_number(text)) == 1.0 and read_number(text) == 0, text
    assert math.copysign(1.0, units.parse_pressure_bar("-0 psi")) == 1.0
    for text in ("1..3", "1,2,3", "inf", "nan", "", "1 250"):
        with pytest.raises(units.UnitError):
            read_number(text)
    with pytest.raises(units.UnitError, match="'1..3' is not a number"):
        units.parse_pressure_bar("1..3")  # not "unknown pressure unit '.3'" (issue 24)
