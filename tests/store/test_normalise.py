import pytest
from hypothesis import given
from hypothesis import strategies as st

from store.base.errors import BookError
from store.physics.fluid import TEMP_MAX_C, ViscosityCurve
from store.physics.normalise import (
    ReferenceCondition,
    cold_start,
    dp_at_temp_bar,
    fixed_reference,
    normalise_dp_bar,
    normalise_reading,
    reference_for,
)

# ASTM D341 worked-example oil, REFERENCES.md §2 (ν40 32, ν100 5.4; ν(80 °C) = 8.5332)
VG32 = ViscosityCurve(32.0, 5.4, False, "ν40 and ν100")


# ---------------------------------------------------------------- the §7b worked example


def test_ref_7b_viscosity_example():
    # REFERENCES.md §7b: 0.5 bar at 32 mm²/s reads 3.125 bar at 200 mm²/s, and back again
    assert normalise_dp_bar(3.125, 200.0, 32.0) == pytest.approx(0.5, rel=1e-12)
    assert normalise_dp_bar(0.5, 32.0, 200.0) == pytest.approx(3.125, rel=1e-12)


def test_ref_7b_flow_example():
    # REFERENCES.md §7b: 0.5 bar at 100 L/min reads 0.75 bar at 150 L/min (same viscosity)
    assert normalise_dp_bar(0.75, 32.0, 32.0, 150.0, 100.0) == pytest.approx(0.5, rel=1e-12)


def test_ref_7b_through_the_curve():
    # REFERENCES.md §7b example on the D341 oil of §2: at the temperature where ν is 200 mm²/s
    # a 0.5 bar (at 32 mm²/s) element shows 3.125 bar
    ref = fixed_reference(32.0, 100.0)
    cold_c = VG32.temp_c(200.0)
    assert dp_at_temp_bar(0.5, cold_c, VG32, ref) == pytest.approx(3.125, rel=1e-9)
    reading = normalise_reading(3.125, cold_c, VG32, ref)
    assert reading.dp_ref_bar == pytest.approx(0.5, rel=1e-9)
    assert reading.nu_cst == pytest.approx(200.0, rel=1e-9)


def test_reading_at_80c_uses_d341_viscosity():
    # ASTM D341 worked example, REFERENCES.md §2: ν(80 °C) = 8.5332 with ν(40 °C) = 32
    ref = reference_for(VG32, 40.0, 120.0)
    assert ref.nu_ref_cst == pytest.approx(32.0, rel=1e-12)
    reading = normalise_reading(1.0, 80.0, VG32, ref, flow_lpm=120.0)
    assert reading.dp_ref_bar == pytest.approx(32.0 / 8.5332, rel=2e-5)
    assert reading.flow_assumed is False


def test_housing_part_is_kept_apart():
    # REFERENCES.md §7b: element ΔP ∝ ν·Q, housing ΔP ∝ ρ·Q² and added on. Hand-worked:
    # 1.0 bar at ref flow, housing 0.2 → element 0.8; at 2× viscosity element → 0.4; +0.2 = 0.6
    assert normalise_dp_bar(1.0, 64.0, 32.0, housing_dp_bar=0.2) == pytest.approx(0.6)
    # at 2× flow: housing 0.2·4 = 0.8, element 2.0 − 0.8 = 1.2 → 1.2 / 2 = 0.6; +0.2 = 0.8
    assert normalise_dp_bar(2.0, 32.0, 32.0, 200.0, 100.0, 0.2) == pytest.approx(0.8)


def test_flow_assumed_when_not_given():
    ref = reference_for(VG32, 50.0, 120.0)
    assert normalise_reading(1.0, 50.0, VG32, ref).flow_assumed is True
    no_flow_ref = reference_for(VG32, 50.0, None)
    assert normalise_reading(1.0, 50.0, VG32, no_flow_ref, flow_lpm=80.0).flow_assumed is True


def test_reference_label():
    # ASTM D341 oil of REFERENCES.md §2 at its 40 °C point: ν 32.0 mm²/s
    assert reference_for(VG32, 40.0, 120.0).label == "ν 32.0 mm²/s (40 °C), 120 L/min"
    assert reference_for(VG32, 40.0, None).label == "ν 32.0 mm²/s (40 °C)"
    assert fixed_reference(30.0).label == "ν 30.0 mm²/s (fixed)"


# ---------------------------------------------------------------- properties (§3 rule)

dps = st.floats(0.0, 20.0)
nus = st.floats(2.0, 50_000.0)
flows = st.floats(1.0, 2_000.0)
factors = st.floats(0.1, 10.0)


@given(dp=dps, nu=nus, q=flows, housing_share=st.floats(0.0, 1.0))
def test_identity_at_reference(dp, nu, q, housing_share):
    # DOMAIN.md §3: at the reference condition the correction does nothing
    housing = dp * housing_share
    assert normalise_dp_bar(dp, nu, nu, q, q, housing) == pytest.approx(dp, abs=1e-12)


def test_reading_below_housing_part_leaves_no_element_part():
    # an element ΔP cannot be negative: a reading under the housing loss alone (gauge
    # resolution) normalises to the housing loss at reference flow
    assert normalise_dp_bar(0.05, 200.0, 32.0, housing_dp_bar=0.1) == pytest.approx(0.1)


@given(dp=dps, nu=nus, k=factors)
def test_linear_in_viscosity(dp, nu, k):
    # REFERENCES.md §7b: element ΔP ∝ ν, so a k-times-thicker reading normalises to dp / k
    assert normalise_dp_bar(dp, nu * k, nu) == pytest.approx(dp / k, rel=1e-9, abs=1e-15)


@given(dp=dps, q=flows, k=factors)
def test_linear_in_flow(dp, q, k):
    # REFERENCES.md §7b: element ΔP ∝ Q, so a reading at k× flow normalises to dp / k
    assert normalise_dp_bar(dp, 32.0, 32.0, q * k, q) == pytest.approx(dp / k, rel=1e-9, abs=1e-15)


@given(dp=st.floats(0.01, 5.0), temp_c=st.floats(-40.0, 120.0))
def test_dp_at_temp_inverts_normalise(dp, temp_c):
    # DOMAIN.md §3: actual → reference → actual is the identity
    ref = reference_for(VG32, 50.0, 100.0)
    dp_ref = normalise_reading(dp, temp_c, VG32, ref).dp_ref_bar
    assert dp_at_temp_bar(dp_ref, temp_c, VG32, ref) == pytest.approx(dp, rel=1e-9)


# ---------------------------------------------------------------- cold start


def test_cold_start_threshold_is_the_7b_example():
    # REFERENCES.md §7b: 0.5 bar at 32 mm²/s reaches 3.125 bar at 200 mm²/s, so a 3.125 bar
    # bypass cracks below the temperature where this oil (§2) has 200 mm²/s
    ref = fixed_reference(32.0, 100.0)
    result = cold_start(0.5, 3.125, 0.0, VG32, ref)
    assert result.bypass_below_c == pytest.approx(VG32.temp_c(200.0), abs=1e-9)
    assert VG32.nu_cst(0.0) > 200.0 and result.bypasses
    assert result.dp_at_start_bar == pytest.approx(0.5 * VG32.nu_cst(0.0) / 32.0)
    warm = cold_start(0.5, 3.125, 30.0, VG32, ref)
    assert not warm.bypasses and warm.bypass_below_c == result.bypass_below_c


def test_cold_start_never_reached():
    # a clean element with a high bypass (ratio 1e6) cannot reach it within −40…150 °C
    result = cold_start(0.0001, 100.0, -40.0, VG32, reference_for(VG32, 50.0, None))
    assert result.bypass_below_c is None and not result.bypasses


def test_cold_start_already_over_when_hot():
    # a reference ΔP 20× the bypass setting is over it across the whole sensible range
    result = cold_start(40.0, 2.0, 20.0, VG32, reference_for(VG32, 50.0, None))
    assert result.bypass_below_c == TEMP_MAX_C and result.bypasses


@given(dp_ref=st.floats(0.01, 3.0), start_c=st.floats(-40.0, 100.0))
def test_cold_start_flag_agrees_with_threshold(dp_ref, start_c):
    # DOMAIN.md §3: bypass opens at every start colder than the reported temperature
    result = cold_start(dp_ref, 3.5, start_c, VG32, reference_for(VG32, 50.0, 100.0))
    if result.bypass_below_c is None:
        assert not result.bypasses
    elif abs(start_c - result.bypass_below_c) > 1e-6:
        assert result.bypasses == (start_c < result.bypass_below_c)


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("call", "words"),
    [
        (lambda: normalise_dp_bar(-0.1, 32.0, 32.0), "ΔP must be 0 bar or more"),
        (lambda: normalise_dp_bar(float("nan"), 32.0, 32.0), "ΔP must be 0 bar or more"),
        (lambda: normalise_dp_bar(1.0, 0.0, 32.0), "viscosity at the reading"),
        (lambda: normalise_dp_bar(1.0, 32.0, -5.0), "reference viscosity"),
        (lambda: normalise_dp_bar(1.0, 32.0, 32.0, 0.0, 100.0), "flow must be more than 0"),
        (lambda: normalise_dp_bar(1.0, 32.0, 32.0, 100.0, -1.0), "reference flow"),
        (lambda: normalise_dp_bar(1.0, 32.0, 32.0, housing_dp_bar=-1.0), "housing"),
        (lambda: ReferenceCondition(0.0, None, "x"), "reference viscosity"),
        (lambda: reference_for(VG32, 50.0, 0.0), "reference flow"),
        (lambda: cold_start(0.5, 0.0, 0.0, VG32, fixed_reference(32.0)), "bypass setting"),
        (lambda: normalise_reading(1.0, 400.0, VG32, fixed_reference(32.0)), "outside"),
    ],
)
def test_bad_input(call, words):
    with pytest.raises(BookError, match=words) as info:
        call()
    assert "\n" not in str(info.value)
