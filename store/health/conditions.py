"""Reference conditions per filter position: the glue between the register and the fluid maths.

A filter's readings are normalised to its unit's fluid at the unit's normal operating
temperature and to the filter's normal flow. When a reading has no temperature, the
normal temperature is assumed; when it has no flow, the normal flow is assumed; both
are said in the result.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import field

from store.base.errors import BookError
from store.base.records import frozen_record
from store.db.book import Book
from store.ledger.entries import Reading
from store.ledger.register import FilterPosition, Fluid, Unit, find, get, list_all, list_shifts
from store.physics.fluid import FluidSpec, ViscosityCurve, resolve_curve
from store.physics.normalise import ReferenceCondition, normalise_dp_bar, reference_for


@frozen_record
class FilterContext:
    position: FilterPosition
    unit: Unit
    curve: ViscosityCurve | None
    reference: ReferenceCondition | None
    problem: str = ""  # why readings cannot be normalised, if they cannot
    shortest_read_h: float = 24.0  # the plant's shortest shift: readings no closer than this
    # (ΔP, temperature, flow) -> reference ΔP already worked out for this position
    memo: dict[tuple, float | None] = field(
        default_factory=dict, compare=False, hash=False, repr=False
    )


@frozen_record
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


def build_context(
    position: FilterPosition, unit: Unit, fluid: Fluid | None, shortest_read_h: float = 24.0
) -> FilterContext:
    key = (fluid, unit.normal_temp_c, position.normal_flow_lpm)
    found = _REFERENCES.get(key)
    if found is None:
        try:
            curve = curve_of(fluid)
            found = (curve, reference_for(curve, unit.normal_temp_c, position.normal_flow_lpm))
        except BookError as exc:
            found = str(exc)
        if len(_REFERENCES) >= 1024:
            _REFERENCES.clear()
        _REFERENCES[key] = found
    if isinstance(found, str):
        return FilterContext(position, unit, None, None, found, shortest_read_h)
    return FilterContext(position, unit, *found, shortest_read_h=shortest_read_h)


# (fluid, reference temperature, reference flow) -> (curve, reference) or why there is none:
# a plant has a handful of fluids, and resolving a curve from a VI solves for ν100.
_REFERENCES: dict[tuple, tuple[ViscosityCurve, ReferenceCondition] | str] = {}


def contexts(book: Book) -> dict[str, FilterContext]:
    """Every filter's context, keyed by upper-case tag (one pass over the register)."""
    return contexts_from(
        list_all(book, Unit),
        list_all(book, Fluid),
        list_all(book, FilterPosition),
        shortest_read_h(book),
    )


def shortest_read_h(book: Book) -> float:
    """The plant's shortest sensible reading interval: its shortest shift (24 h without a
    pattern). store/forecast/readplan.py never plans two readings closer than this."""
    # Deferred: a watch list read from fresh kept rows builds no contexts and loads nothing
    # of store.forecast (tests/cli/test_lean_path.py).
    from store.forecast.readplan import shortest_shift_h

    return shortest_shift_h([s.starts for s in list_shifts(book)])


def contexts_from(
    units: Sequence[Unit],
    fluids: Sequence[Fluid],
    positions: Sequence[FilterPosition],
    shortest_h: float = 24.0,
) -> dict[str, FilterContext]:
    """`contexts` from register rows already read (shortest_h: `shortest_read_h`)."""
    by_unit = {u.tag: u for u in units}
    by_fluid = {f.tag: f for f in fluids}
    result = {}
    for position in positions:
        unit = by_unit[position.unit]
        fluid = by_fluid.get(unit.fluid or "")
        result[position.tag] = build_context(position, unit, fluid, shortest_h)
    return result


def context(book: Book, filter_tag: str) -> FilterContext:
    position = find(book, FilterPosition, filter_tag)
    if position is None:
        get(book, FilterPosition, filter_tag)  # raises with a suggestion
    unit = find(book, Unit, position.unit)  # type: ignore[union-attr]
    fluid = find(book, Fluid, unit.fluid) if unit and unit.fluid else None  # type: ignore[union-attr]
    return build_context(position, unit, fluid, shortest_read_h(book))  # type: ignore[arg-type]


_NU_MEMO_SIZE = 4096  # distinct temperatures kept per fluid curve


def _nu_at(ctx: FilterContext, temp_c: float) -> float | str:
    """ν at temp_c on the context's curve, or the reason there is none; memoised per curve
    (temperatures are logged to a degree or so, and a book holds millions of readings)."""
    memo = _NU_MEMO.setdefault(ctx.curve, {})  # type: ignore[arg-type]
    found = memo.get(temp_c)
    if found is None:
        try:
            found = ctx.curve.nu_cst(temp_c)  # type: ignore[union-attr]
        except BookError as exc:
            found = str(exc)
        if len(memo) >= _NU_MEMO_SIZE:
            memo.clear()
        memo[temp_c] = found
    return found


_NU_MEMO: dict[ViscosityCurve, dict[float, float | str]] = {}


def dp_ref_bar(
    ctx: FilterContext, dp_bar: float | None, temp_c: float | None, flow_lpm: float | None
) -> float | None:
    """`normalise(ctx, reading).dp_ref_bar` for a reading's values, without building the
    result; memoised on the context (gauges read in steps, temperatures in degrees: a
    history of thousands of readings holds a few hundred distinct ones)."""
    if dp_bar is None or ctx.curve is None or ctx.reference is None:
        return None
    memo = ctx.memo
    key = (dp_bar, temp_c, flow_lpm)
    if key in memo:
        return memo[key]
    found: float | None = None
    nu_cst = _nu_at(ctx, ctx.unit.normal_temp_c if temp_c is None else temp_c)
    if not isinstance(nu_cst, str):
        reference = ctx.reference
        try:
            found = normalise_dp_bar(
                dp_bar, nu_cst, reference.nu_ref_cst, flow_lpm, reference.flow_ref_lpm
            )
        except BookError:
            found = None
    if len(memo) >= _DP_MEMO_SIZE:
        memo.clear()
    memo[key] = found
    return found


_DP_MEMO_SIZE = 20_000


def normalise(ctx: FilterContext, reading: Reading) -> Normalised:
    """The reading at the position's reference condition (the same sums as
    `normalise_reading`, with the viscosity at the reading's temperature memoised)."""
    if reading.dp_bar is None:
        return Normalised(None, None, False, False, "indicator only")
    if ctx.curve is None or ctx.reference is None:
        return Normalised(None, None, False, False, ctx.problem)
    temp_assumed = reading.temp_c is None
    temp_c = ctx.unit.normal_temp_c if temp_assumed else reading.temp_c
    nu_cst = _nu_at(ctx, temp_c)  # type: ignore[arg-type]
    if isinstance(nu_cst, str):
        return Normalised(None, None, temp_assumed, True, nu_cst)
    reference = ctx.reference
    try:
        dp_ref_bar = normalise_dp_bar(
            reading.dp_bar, nu_cst, reference.nu_ref_cst, reading.flow_lpm, reference.flow_ref_lpm
        )
    except BookError as exc:
        return Normalised(None, None, temp_assumed, True, str(exc))
    flow_assumed = reading.flow_lpm is None or reference.flow_ref_lpm is None
    return Normalised(dp_ref_bar, nu_cst, temp_assumed, flow_assumed)
