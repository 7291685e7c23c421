"""The one entry builder (store/ledger/entry_input.py): typed text in the user's units to
the entry in stored units."""

from __future__ import annotations

import pytest

from store.base.prefs import Prefs
from store.ledger.entry_input import FieldError, build

BAR = Prefs(pressure="bar", temperature="C", volume="L")
US = Prefs(pressure="psi", temperature="F", volume="gal")


def test_a_reading_in_the_users_units_is_stored_in_bar_and_celsius():
    entry = build("reading", {"filter": "P1-RF", "dp": "18", "temp": "113"}, US)
    # 1 psi = 6.894757 kPa (NIST SP 811, appendix B.8): 18 psi = 1.2410563 bar
    assert entry.dp_bar == pytest.approx(1.2410563, rel=1e-6)
    # t/°C = (t/°F - 32)/1.8 (NIST SP 811, B.8): 113 °F = 45 °C
    assert entry.temp_c == pytest.approx(45.0)


def test_a_top_up_in_gallons_with_its_cart():
    entry = build("topup", {"unit": "P1", "volume": "5", "filtered": "3"}, US)
    # 1 US gal = 3.785412 L (NIST SP 811, B.8)
    assert entry.volume_l == pytest.approx(18.92706, rel=1e-6)
    assert entry.filtered_um == 3.0


@pytest.mark.parametrize(
    "typed,field",
    [
        ({"filter": "P1-RF"}, "dp"),  # neither ΔP nor indicator
        ({"filter": "P1-RF", "dp": "1,250"}, "dp"),  # reads two ways
        ({"filter": "P1-RF", "indicator": "green"}, "indicator"),
        ({"filter": "P1-RF", "dp": "1", "flow": "12 x"}, "flow"),
    ],
)
def test_a_field_that_cannot_be_read_is_named(typed, field):
    with pytest.raises(FieldError) as caught:
        build("reading", typed, BAR)
    assert caught.value.field == field


def test_counts_typed_as_one_text_or_three_fields_are_the_same_sample():
    one = build("sample", {"unit": "P1", "counts": "-/500/60"}, BAR)
    three = build("sample", {"unit": "P1", "c6": "500", "c14": "60"}, BAR)
    assert (one.c4_per_ml, one.c6_per_ml, one.c14_per_ml) == (None, 500.0, 60.0)
    assert one == three
    with pytest.raises(FieldError) as caught:
        build("sample", {"unit": "P1", "counts": "1/2,500/3"}, BAR)
    assert caught.value.field == "counts"


def test_a_top_up_rating_with_unfiltered_is_refused_on_the_choice():
    with pytest.raises(FieldError) as caught:
        build("topup", {"unit": "P1", "volume": "5", "how": "unfiltered", "filtered": "3"}, BAR)
    assert caught.value.field == "how"
    with pytest.raises(FieldError) as caught:
        build("topup", {"unit": "P1", "volume": "5"}, BAR)
    assert caught.value.field == "filtered"
