import math

import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from store.base.errors import BookError
from store.physics.fluid import (
    FluidRangeError,
    FluidSpec,
    ViscosityCurve,
    iso_vg_limits,
    nu100_from_vi,
    resolve_curve,
    temp_for_viscosity_c,
    viscosity_cst,
    viscosity_index,
    walther_coefficients,
)

# ---------------------------------------------------------------- ASTM D341 (Walther)


def test_d341_worked_example_coefficients():
    # ASTM D341 worked example (32 / 5.4 cSt) with T = t + 273.15, REFERENCES.md §2
    a, b = walther_coefficients(32.0, 5.4)
    assert a == pytest.approx(9.5308, abs=5e-5)
    assert b == pytest.approx(3.7466, abs=5e-5)


def test_d341_worked_example_viscosities():
    # ASTM D341 worked example, REFERENCES.md §2: ν(80 °C) = 8.5332, ν(60 °C) = 15.186
    assert viscosity_cst(80.0, 32.0, 5.4) == pytest.approx(8.5332, abs=1e-4)
    assert viscosity_cst(60.0, 32.0, 5.4) == pytest.approx(15.186, abs=1e-3)
    # the published rounded figure is 8.5 cSt at 80 °C (scribd calculator, REFERENCES.md §2)
    assert round(viscosity_cst(80.0, 32.0, 5.4), 1) == 8.5


def test_d341_curve_passes_through_its_two_points():
    # ASTM D341 two-point fit, REFERENCES.md §2: the line goes through (40 °C, ν40), (100 °C, ν100)
    assert viscosity_cst(40.0, 46.0, 6.8) == pytest.approx(46.0, rel=1e-12)
    assert viscosity_cst(100.0, 46.0, 6.8) == pytest.approx(6.8, rel=1e-12)


def test_d341_inverse_round_trip_on_worked_example():
    # ASTM D341 worked example, REFERENCES.md §2: 8.5332 cSt is reached at 80 °C, 15.186 at 60 °C
    assert temp_for_viscosity_c(8.5332, 32.0, 5.4) == pytest.approx(80.0, abs=0.01)
    assert temp_for_viscosity_c(15.186, 32.0, 5.4) == pytest.approx(60.0, abs=0.01)


def test_d341_is_a_straight_line_in_loglog_vs_logt():
    # ASTM D341 form, REFERENCES.md §2: log10 log10 (ν + 0.7) is linear in log10 T (kelvin);
    # checked here by an independent least-squares line through five computed points
    import numpy as np

    temps_c = np.array([0.0, 20.0, 50.0, 75.0, 120.0])
    nus = np.array([viscosity_cst(t, 68.0, 8.7) for t in temps_c])
    x = np.log10(temps_c + 273.15)
    y = np.log10(np.log10(nus + 0.7))
    slope, intercept = np.polyfit(x, y, 1)
    a, b = walther_coefficients(68.0, 8.7)
    assert slope == pytest.approx(-b, rel=1e-9)
    assert intercept == pytest.approx(a, rel=1e-9)


@given(
    nu40=st.floats(10.0, 1500.0),
    ratio=st.floats(3.0, 20.0),
    t1=st.floats(-40.0, 150.0),
    t2=st.floats(-40.0, 150.0),
)
def test_viscosity_strictly_falls_with_temperature(nu40, ratio, t1, t2):
    # physical fact of liquids; ASTM D341 curves have B > 0 (REFERENCES.md §2)
    nu100 = nu40 / ratio
    assume(nu100 >= 2.0 and abs(t1 - t2) > 1e-6)
    lo, hi = sorted((t1, t2))
    try:
        nu_hi = viscosity_cst(hi, nu40, nu100)
    except FluidRangeError:
        assume(False)
    assert viscosity_cst(lo, nu40, nu100) > nu_hi


@given(temp_c=st.floats(-40.0, 150.0))
def test_inverse_round_trip(temp_c):
    # ASTM D341 closed-form inverse, REFERENCES.md §2 ("Fit from two points" row)
    nu = viscosity_cst(temp_c, 46.0, 6.8)
    assert temp_for_viscosity_c(nu, 46.0, 6.8) == pytest.approx(temp_c, abs=1e-6)


@pytest.mark.parametrize(
    ("call", "words"),
    [
        (lambda: viscosity_cst(40.0, 0.0, 5.0), "positive"),
        (lambda: viscosity_cst(40.0, 32.0, -1.0), "positive"),
        (lambda: viscosity_cst(40.0, float("nan"), 5.0), "positive"),
        (lambda: viscosity_cst(-60.0, 32.0, 5.4), "outside"),
        (lambda: viscosity_cst(200.0, 32.0, 5.4), "outside"),
        (lambda: viscosity_cst(150.0, 7.0, 2.0), "Walther"),  # VG 7 at 150 °C is < 2 mm²/s
        (lambda: viscosity_cst(40.0, 32.0, 1.5), "Walther"),
        (lambda: viscosity_cst(40.0, 5.0, 6.0), "larger"),
        (lambda: temp_for_viscosity_c(1.0, 32.0, 5.4), "Walther"),
        (lambda: temp_for_viscosity_c(1e7, 32.0, 5.4), "outside"),
    ],
)
def test_viscosity_bad_input(call, words):
    with pytest.raises(FluidRangeError, match=words) as info:
        call()
    assert isinstance(info.value, BookError)
    assert "\n" not in str(info.value)


# ---------------------------------------------------------------- ASTM D2270 (VI)


def test_d2270_procedure_a_worked_example():
    # ASTM D2270 cl. 5.1.4 worked example, REFERENCES.md §3b: 73.30 / 8.86 → 92.43 → VI 92
    vi = viscosity_index(73.30, 8.86)
    assert vi == pytest.approx(92.43, abs=0.01)
    assert round(vi) == 92


def test_d2270_procedure_a_interpolated_l_and_h():
    # ASTM D2270 cl. 5.1.4, REFERENCES.md §3b: at ν100 8.86 the table gives L 119.94, H 69.48;
    # an oil with ν40 = L has VI 0 and one with ν40 = H has VI 100 (2 VI per mm²/s here)
    assert viscosity_index(119.94, 8.86) == pytest.approx(0.0, abs=0.02)
    assert viscosity_index(69.48, 8.86) == pytest.approx(100.0, abs=0.02)


def test_d2270_procedure_b_worked_example():
    # ASTM D2270 cl. 6.1.4 ex. (1), REFERENCES.md §3b: 22.83 / 5.05 → 156.37 (±0.1 for unrounded H)
    assert viscosity_index(22.83, 5.05) == pytest.approx(156.37, abs=0.1)
    assert round(viscosity_index(22.83, 5.05)) == 156


# ASTM D2270 Table 1 rows quoted in REFERENCES.md §3c (ν100, L, H)
D2270_ROWS = [
    (2.0, 7.994, 6.394),
    (5.0, 40.23, 28.49),
    (6.0, 57.97, 38.19),
    (7.0, 78.00, 48.57),
    (7.8, 95.43, 57.31),
    (8.0, 100.0, 59.60),
    (8.8, 118.5, 68.79),
    (8.9, 120.9, 69.94),
    (9.0, 123.3, 71.10),
    (10.0, 147.7, 82.87),
    (70.0, 4905.0, 1558.0),
]


@pytest.mark.parametrize(("nu100", "low", "high"), D2270_ROWS)
def test_d2270_table_rows(nu100, low, high):
    # ASTM D2270 Table 1, REFERENCES.md §3c: ν40 = L gives VI 0, ν40 = H gives VI 100
    assert viscosity_index(low, nu100) == pytest.approx(0.0, abs=1e-9)
    assert viscosity_index(high, nu100) == pytest.approx(100.0, abs=1e-9)


@pytest.mark.parametrize(("nu100", "low", "high"), D2270_ROWS)
def test_nu100_from_vi_recovers_table_rows(nu100, low, high):
    # ASTM D2270 Table 1, REFERENCES.md §3c: the VI 0 oil of a row has ν40 = L, the VI 100 oil H
    assert nu100_from_vi(low, 0.0) == pytest.approx(nu100, abs=1e-6)
    assert nu100_from_vi(high, 100.0) == pytest.approx(nu100, abs=1e-6)


def test_d2270_above_70_formula_branch():
    # chemicals 1.5.2 viscosity_index, REFERENCES.md §3c (ν100 > 70 formulas of §3a)
    assert viscosity_index(1000.0, 75.0) == pytest.approx(148.006, abs=1e-3)
    assert viscosity_index(1500.0, 80.0) == pytest.approx(119.753, abs=1e-3)


def test_d2270_table_and_formula_meet_at_70():
    # ASTM D2270 cl. 5.1.2 formulas vs Table 1 at 70 mm²/s (L 4905, H 1558), REFERENCES.md §3a/§3c
    assert viscosity_index(3000.0, 70.0 + 1e-9) == pytest.approx(
        viscosity_index(3000.0, 70.0), abs=0.1
    )


def test_nu100_from_vi_worked_example_round_trip():
    # ASTM D2270 cl. 5.1.4 worked example, REFERENCES.md §3b: VI 92.43 with ν40 73.30 → ν100 8.86
    assert nu100_from_vi(73.30, 92.4296) == pytest.approx(8.86, abs=1e-4)
    # ASTM D2270 cl. 6.1.4 ex. (1): VI 156.42 with ν40 22.83 → ν100 5.05
    assert nu100_from_vi(22.83, 156.4235) == pytest.approx(5.05, abs=1e-4)


@given(nu40=st.floats(10.0, 1000.0), vi=st.floats(-20.0, 250.0))
def test_nu100_from_vi_round_trip(nu40, vi):
    # ASTM D2270 procedures A and B solved backwards (REFERENCES.md §3a)
    try:
        nu100 = nu100_from_vi(nu40, vi)
    except FluidRangeError:
        assume(False)
    assert viscosity_index(nu40, nu100) == pytest.approx(vi, abs=1e-6)


def test_vi_bad_input():
    with pytest.raises(FluidRangeError, match="not defined"):
        viscosity_index(10.0, 1.5)  # ASTM D2270 cl. 5.1.1: VI undefined below 2 mm²/s
    with pytest.raises(FluidRangeError, match="no ν100"):
        nu100_from_vi(5.0, 100.0)  # VG 5 oil: ν100 would be below 2 mm²/s
    with pytest.raises(FluidRangeError, match="number"):
        nu100_from_vi(46.0, float("nan"))


# ---------------------------------------------------------------- ISO 3448


@pytest.mark.parametrize(
    ("grade", "expected"),
    [
        # ISO 3448 grade table, REFERENCES.md §4
        (22, (19.8, 22.0, 24.2)),
        (32, (28.8, 32.0, 35.2)),
        (46, (41.4, 46.0, 50.6)),
        (68, (61.2, 68.0, 74.8)),
        (100, (90.0, 100.0, 110.0)),
    ],
)
def test_iso_vg_rows(grade, expected):
    assert iso_vg_limits(grade) == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize("grade", [0, 4, 40, 47, 2000, -32])
def test_iso_vg_unknown_grade(grade):
    with pytest.raises(BookError, match="not a standard grade"):
        iso_vg_limits(grade)


# ---------------------------------------------------------------- resolve_curve


def test_resolve_prefers_measured_pair():
    # ASTM D341 worked example, REFERENCES.md §2: with ν40 and ν100 the VI given is ignored
    curve = resolve_curve(FluidSpec("HM 32", 32, 32.0, 5.4, 150.0))
    assert (curve.nu40_cst, curve.nu100_cst, curve.estimated) == (32.0, 5.4, False)
    assert curve.basis == "ν40 and ν100"
    assert curve.nu_cst(80.0) == pytest.approx(8.5332, abs=1e-4)


def test_resolve_from_nu40_and_vi():
    # ASTM D2270 cl. 5.1.4 worked example, REFERENCES.md §3b: ν40 73.30 and VI 92.43 → ν100 8.86
    curve = resolve_curve(FluidSpec("gear", None, 73.30, None, 92.4296))
    assert curve.nu100_cst == pytest.approx(8.86, abs=1e-4)
    assert not curve.estimated
    assert curve.basis == "ν40 and VI"


def test_resolve_from_grade_assumes_vi_100():
    # ISO 3448 midpoint (REFERENCES.md §4) and VI 100 means ν40 = H (ASTM D2270 Table 1, §3c);
    # VG 46 at VI 100 must land between the 6.7 and 6.8 rows of H (45.33 and 46.44)
    curve = resolve_curve(FluidSpec("HLP 46", 46, None, None, None))
    assert curve.nu40_cst == 46.0
    assert 6.7 < curve.nu100_cst < 6.8
    assert curve.estimated
    assert curve.basis == "ISO VG 46 midpoint, VI 100 assumed (estimate)"
    assert viscosity_index(curve.nu40_cst, curve.nu100_cst) == pytest.approx(100.0, abs=1e-6)


def test_resolve_nu40_only_assumes_vi_100():
    # ASTM D2270 Table 1 row 8.0: H = 59.60 (REFERENCES.md §3c)
    curve = resolve_curve(FluidSpec("odd", None, 59.60, None, None))
    assert curve.nu100_cst == pytest.approx(8.0, abs=1e-6)
    assert curve.estimated and "VI 100 assumed" in curve.basis


def test_resolve_nothing_known():
    with pytest.raises(BookError, match="needs ν40 or an ISO VG grade"):
        resolve_curve(FluidSpec("mystery", None, None, 5.0, 100.0))


def test_curve_rejects_bad_pair():
    with pytest.raises(FluidRangeError):
        ViscosityCurve(5.0, 6.0, False, "typo")
    assert math.isfinite(ViscosityCurve(32.0, 5.4, False, "ok").temp_c(20.0))
