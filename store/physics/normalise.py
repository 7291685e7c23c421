"""Correct a filter ΔP reading to reference viscosity and flow, and check cold starts.

The element (media) part of ΔP is laminar flow through porous media, so it goes with ν·Q.
The housing part is turbulent and goes with Q² (density barely changes with temperature, so it
is taken as independent of temperature). `housing_dp_bar` is always the housing part at the
reference flow; leave it 0 when it is not known.
"""

from __future__ import annotations

import math

from store.base.errors import BookError
from store.base.records import frozen_record
from store.physics.fluid import MIN_NU_CST, TEMP_MAX_C, TEMP_MIN_C, ViscosityCurve


@frozen_record
class ReferenceCondition:
    """The condition every ΔP is corrected to, with a label to show beside the numbers."""

    nu_ref_cst: float
    flow_ref_lpm: float | None
    label: str

    def __post_init__(self) -> None:
        _check_positive("reference viscosity", self.nu_ref_cst, "mm²/s")
        if self.flow_ref_lpm is not None:
            _check_positive("reference flow", self.flow_ref_lpm, "L/min")


@frozen_record
class NormalisedReading:
    """A ΔP reading and the same reading at the reference condition."""

    dp_bar: float
    temp_c: float
    dp_ref_bar: float
    nu_cst: float
    flow_assumed: bool
    reference: ReferenceCondition


@frozen_record
class ColdStart:
    """ΔP at the coldest expected start, and whether the bypass then opens."""

    start_temp_c: float
    dp_at_start_bar: float
    bypass_bar: float
    bypasses: bool
    bypass_below_c: float | None


def _check_positive(name: str, value: float, unit: str) -> None:
    if not (math.isfinite(value) and value > 0):
        raise BookError(f"{name} must be more than 0 {unit}, got {value!r}")


def _check_dp(name: str, value: float) -> None:
    if not (math.isfinite(value) and value >= 0):
        raise BookError(f"{name} must be 0 bar or more, got {value!r}")


def _flow_label(flow_ref_lpm: float | None) -> str:
    return "" if flow_ref_lpm is None else f", {flow_ref_lpm:g} L/min"


def reference_for(
    curve: ViscosityCurve, ref_temp_c: float, flow_ref_lpm: float | None
) -> ReferenceCondition:
    """Reference condition: the fluid at the unit's normal operating temperature."""
    nu_ref = curve.nu_cst(ref_temp_c)
    label = f"ν {nu_ref:.1f} mm²/s ({ref_temp_c:g} °C){_flow_label(flow_ref_lpm)}"
    return ReferenceCondition(nu_ref, flow_ref_lpm, label)


def fixed_reference(nu_ref_cst: float, flow_ref_lpm: float | None = None) -> ReferenceCondition:
    """Reference condition at a fixed viscosity, whatever the unit's temperature."""
    _check_positive("reference viscosity", nu_ref_cst, "mm²/s")
    label = f"ν {nu_ref_cst:.1f} mm²/s (fixed){_flow_label(flow_ref_lpm)}"
    return ReferenceCondition(nu_ref_cst, flow_ref_lpm, label)


def normalise_dp_bar(
    dp_bar: float,
    nu_at_reading_cst: float,
    nu_ref_cst: float,
    flow_lpm: float | None = None,
    flow_ref_lpm: float | None = None,
    housing_dp_bar: float = 0.0,
) -> float:
    """ΔP corrected to reference viscosity (and to reference flow when both flows are known).

    The housing part, scaled to the reading's flow, is taken off first; a reading smaller than
    that (gauge resolution) leaves an element part of 0.
    """
    _check_dp("ΔP", dp_bar)
    _check_dp("housing ΔP", housing_dp_bar)
    _check_positive("viscosity at the reading", nu_at_reading_cst, "mm²/s")
    _check_positive("reference viscosity", nu_ref_cst, "mm²/s")
    if flow_lpm is not None:
        _check_positive("flow", flow_lpm, "L/min")
    if flow_ref_lpm is not None:
        _check_positive("reference flow", flow_ref_lpm, "L/min")
    flow_ratio = 1.0
    if flow_lpm is not None and flow_ref_lpm is not None:
        flow_ratio = flow_lpm / flow_ref_lpm
    element_bar = max(dp_bar - housing_dp_bar * flow_ratio**2, 0.0)
    element_ref_bar = element_bar * (nu_ref_cst / nu_at_reading_cst) / flow_ratio
    return element_ref_bar + housing_dp_bar


def normalise_reading(
    dp_bar: float,
    temp_c: float,
    curve: ViscosityCurve,
    reference: ReferenceCondition,
    flow_lpm: float | None = None,
    housing_dp_bar: float = 0.0,
) -> NormalisedReading:
    """Normalise one reading; flow_assumed is True when no flow correction could be made."""
    nu_cst = curve.nu_cst(temp_c)
    dp_ref_bar = normalise_dp_bar(
        dp_bar, nu_cst, reference.nu_ref_cst, flow_lpm, reference.flow_ref_lpm, housing_dp_bar
    )
    flow_assumed = flow_lpm is None or reference.flow_ref_lpm is None
    return NormalisedReading(dp_bar, temp_c, dp_ref_bar, nu_cst, flow_assumed, reference)


def dp_at_temp_bar(
    dp_ref_bar: float,
    temp_c: float,
    curve: ViscosityCurve,
    reference: ReferenceCondition,
    housing_dp_bar: float = 0.0,
) -> float:
    """Actual ΔP expected at fluid temperature temp_c and reference flow."""
    _check_dp("reference ΔP", dp_ref_bar)
    _check_dp("housing ΔP", housing_dp_bar)
    element_ref_bar = max(dp_ref_bar - housing_dp_bar, 0.0)
    return element_ref_bar * curve.nu_cst(temp_c) / reference.nu_ref_cst + housing_dp_bar


def cold_start(
    dp_ref_bar: float,
    bypass_bar: float,
    coldest_start_c: float,
    curve: ViscosityCurve,
    reference: ReferenceCondition,
    housing_dp_bar: float = 0.0,
) -> ColdStart:
    """ΔP at the coldest start and the fluid temperature below which the bypass opens.

    bypass_below_c is None when the bypass is not reached even at the bottom of the fluid's
    sensible range; it is the top of that range when the bypass is reached at every temperature.
    """
    _check_positive("bypass setting", bypass_bar, "bar")
    dp_start = dp_at_temp_bar(dp_ref_bar, coldest_start_c, curve, reference, housing_dp_bar)
    element_ref_bar = max(dp_ref_bar - housing_dp_bar, 0.0)
    element_room_bar = bypass_bar - housing_dp_bar
    below_c: float | None
    if element_room_bar <= 0:
        below_c = TEMP_MAX_C
    elif element_ref_bar == 0:
        below_c = None
    else:
        nu_bypass = reference.nu_ref_cst * element_room_bar / element_ref_bar
        if nu_bypass > curve.nu_cst(TEMP_MIN_C):
            below_c = None
        elif nu_bypass <= max(MIN_NU_CST, _nu_at_top(curve)):
            below_c = TEMP_MAX_C
        else:
            below_c = curve.temp_c(nu_bypass)
    return ColdStart(coldest_start_c, dp_start, bypass_bar, dp_start >= bypass_bar, below_c)


def _nu_at_top(curve: ViscosityCurve) -> float:
    """Viscosity at the top of the sensible range, or 0 where the Walther form stops first."""
    try:
        return curve.nu_cst(TEMP_MAX_C)
    except BookError:
        return 0.0
