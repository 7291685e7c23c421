"""Issue 20, case 7 in the app's forms: a field takes only its own quantity's units."""

from __future__ import annotations

import pytest

from tui.forms.validators import DpValidator, TemperatureValidator, VolumeValidator


@pytest.mark.parametrize(
    "validator, text, ok",
    [
        (TemperatureValidator("C"), "100kPa", False),  # used to be read as 100 °F
        (TemperatureValidator("C"), "113 F", True),
        (VolumeValidator("L"), "12 kPa", False),  # used to raise a KeyError
        (VolumeValidator("L"), "5 gal", True),
        (DpValidator("bar"), "3 L", False),
        (DpValidator("bar"), "18 psi", True),
    ],
)
def test_each_field_takes_its_own_units_only(validator, text, ok):
    assert validator.validate(text).is_valid is ok
