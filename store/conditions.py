"""Reference conditions per filter position: the glue between the register and the fluid maths.

A filter's readings are normalised to its unit's fluid at the unit's normal operating
temperature and to the filter's normal flow. When a reading has no temperature, the
normal temperature is assumed; when it has no flow, the normal flow is assumed; both
are said in the result.
"""

from __future__ import annotations

from dataclasses import dataclass

from .book import Book
from .entries import Reading
from .errors import BookError
from .fluid import FluidSpec, ViscosityCurve, resolve_curve
from .normalise import NormalisedReading, ReferenceCondition, normalise_reading, reference_for
from .register import FilterPosition, Fluid, Unit, find, list_all


@dataclass(frozen=True)
class FilterContext:
    position: FilterPosition
    unit: Unit
    curve: ViscosityCurve | None
    reference: ReferenceCondition | None
    problem: str = ""  # why readings cannot be normalised, if they cannot


@dataclass(frozen=True)
class Normalised:
    """One reading with its reference value, or the reason there is none."""

    dp_ref_bar: float | None
    nu_cst: float | None
    temp_assumed: bool
    flow_assumed: bool
    problem: str = ""


def curve_of(fluid: Fluid | None) -> ViscosityCurve:
    if fluid is None:
        raise BookError("the unit has no fluid registered")
    return resolve_curve(
        FluidSpec(
            name=fluid.name or fluid.tag,
            iso_vg=fluid.iso_vg,
            nu40_cst=fluid.nu40_cst,
            nu100_cst=fluid.nu100_cst,
            vi=fluid.vi,
        )
    )


def build_context(position: FilterPosition, unit: Unit, fluid: Fluid | None) -> FilterContext:
    try:
        curve = curve_of(fluid)
        reference = reference_for(curve, unit.normal_temp_c, position.normal_flow_lpm)
    except BookError as exc:
        return FilterContext(position, unit, None, None, str(exc))
    return FilterContext(position, unit, curve, reference)


def contexts(book: Book) -> dict[str, FilterContext]:
    """Every filter's context, keyed by upper-case tag (one pass over the register)."""
    units = {u.tag: u for u in list_all(book, Unit)}
    fluids = {f.tag: f for f in list_all(book, Fluid)}
    result = {}
    for position in list_all(book, FilterPosition):
        unit = units[position.unit]
        result[position.tag] = build_context(position, unit, fluids.get(unit.fluid or ""))
    return result


def context(book: Book, filter_tag: str) -> FilterContext:
    position = find(book, FilterPosition, filter_tag)
    if position is None:
        from .register import get

        get(book, FilterPosition, filter_tag)  # raises with a suggestion
    unit = find(book, Unit, position.unit)  # type: ignore[union-attr]
    fluid = find(book, Fluid, unit.fluid) if unit and unit.fluid else None  # type: ignore[union-attr]
    return build_context(position, unit, fluid)  # type: ignore[arg-type]


def normalise(ctx: FilterContext, reading: Reading) -> Normalised:
    if reading.dp_bar is None:
        return Normalised(None, None, False, False, "indicator only")
    if ctx.curve is None or ctx.reference is None:
        return Normalised(None, None, False, False, ctx.problem)
    temp_assumed = reading.temp_c is None
    temp_c = ctx.unit.normal_temp_c if temp_assumed else reading.temp_c
    try:
        result: NormalisedReading = normalise_reading(
            reading.dp_bar,
            temp_c,
            ctx.curve,
            ctx.reference,
            reading.flow_lpm,  # type: ignore[arg-type]
        )
    except BookError as exc:
        return Normalised(None, None, temp_assumed, True, str(exc))
    return Normalised(result.dp_ref_bar, result.nu_cst, temp_assumed, result.flow_assumed)
