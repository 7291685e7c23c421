"""ISO 4406 cleanliness codes from particle counts per mL at ≥4, ≥6 and ≥14 µm(c)."""

from __future__ import annotations

import math
import re
from bisect import bisect_left

from store.base.errors import BookError
from store.base.records import frozen_record

# ISO 4406 Table 1: upper limit (inclusive) of particles per mL for scale numbers 0..28.
# The limits are rounded, not exact doublings (e.g. 1.3, 2.5, 80, 1 300), so use the table.
_UPPER_LIMITS_PER_ML = (
    0.01, 0.02, 0.04, 0.08, 0.16, 0.32, 0.64, 1.3, 2.5, 5.0,  # 0-9
    10.0, 20.0, 40.0, 80.0, 160.0, 320.0, 640.0, 1_300.0, 2_500.0, 5_000.0,  # 10-19
    10_000.0, 20_000.0, 40_000.0, 80_000.0, 160_000.0, 320_000.0, 640_000.0,  # 20-26
    1_300_000.0, 2_500_000.0,  # 27-28
)  # fmt: skip
OVER_28 = 29  # scale number meaning "more than 2 500 000 per mL", written ">28"
SIZES = ("≥4", "≥6", "≥14")


def scale_number(count_per_ml: float) -> int:
    """ISO 4406 scale number for a count per mL (29 stands for ">28")."""
    if not (math.isfinite(count_per_ml) and count_per_ml >= 0):
        raise BookError(f"particle count must be 0 or more per mL, got {count_per_ml!r}")
    return bisect_left(_UPPER_LIMITS_PER_ML, count_per_ml)


def _part(number: int | None) -> str:
    if number is None:
        return "-"
    return ">28" if number == OVER_28 else str(number)


@frozen_record
class CleanlinessCode:
    """An ISO 4406 code; c4 is None for a two-part (microscope) code such as -/18/13."""

    c4: int | None
    c6: int
    c14: int

    def __post_init__(self) -> None:
        numbers = (self.c6, self.c14) if self.c4 is None else (self.c4, self.c6, self.c14)
        for number in numbers:
            if not (isinstance(number, int) and 0 <= number <= OVER_28):
                raise BookError(f"ISO 4406 scale numbers run from 0 to >28, got {number!r}")

    def __str__(self) -> str:
        return "/".join(_part(n) for n in (self.c4, self.c6, self.c14))


def code_from_counts(
    c4_per_ml: float | None, c6_per_ml: float, c14_per_ml: float
) -> CleanlinessCode:
    """Code from cumulative counts per mL (c4 None gives a two-part code)."""
    counts = [c for c in (c4_per_ml, c6_per_ml, c14_per_ml) if c is not None]
    if any(larger < smaller for larger, smaller in zip(counts, counts[1:], strict=False)):
        raise BookError("cumulative counts cannot rise with particle size (≥4 ≥ ≥6 ≥ ≥14)")
    c4 = None if c4_per_ml is None else scale_number(c4_per_ml)
    return CleanlinessCode(c4, scale_number(c6_per_ml), scale_number(c14_per_ml))


_PART = r"\s*(>\s*28|≥?\s*\d{1,2}|[-–])\s*"
_CODE_RE = re.compile(f"^{_PART}/{_PART}/{_PART}$")


def _parse_part(text: str, allow_dash: bool) -> int | None:
    text = text.replace(" ", "")
    if text in ("-", "–"):
        if allow_dash:
            return None
        raise BookError("only the ≥4 µm number of an ISO 4406 code may be '-'")
    if text == ">28":
        return OVER_28
    number = int(text.lstrip("≥"))  # "≥7" (fewer than 20 counted) is read as 7
    if number > 28:
        raise BookError(f"ISO 4406 scale numbers stop at 28; write >28 instead of {number}")
    return number


def parse_code(text: str) -> CleanlinessCode:
    """Read a code such as "18/16/13", "-/16/13" or ">28/7/7"."""
    match = _CODE_RE.match(text)
    if match is None:
        raise BookError(f"{text.strip()!r} is not an ISO 4406 code like 18/16/13 or -/16/13")
    c4, c6, c14 = match.groups()
    return CleanlinessCode(_parse_part(c4, True), _parse_part(c6, False), _parse_part(c14, False))


@frozen_record
class CodeComparison:
    """A code against a target; excess_steps holds only the sizes over target (steps > 0)."""

    meets: bool
    excess_steps: dict[str, int]
    target: CleanlinessCode

    def describe(self) -> str:
        """Plain text, e.g. "meets 17/15/12" or "≥4 µm +2, ≥14 µm +1 over 17/15/12"."""
        if self.meets:
            return f"meets {self.target}"
        parts = ", ".join(f"{size} µm +{steps}" for size, steps in self.excess_steps.items())
        return f"{parts} over {self.target}"


def compare_to_target(code: CleanlinessCode, target: CleanlinessCode) -> CodeComparison:
    """Compare size by size; the ≥4 µm number counts only when both codes have one."""
    excess: dict[str, int] = {}
    for size, got, limit in zip(
        SIZES, (code.c4, code.c6, code.c14), (target.c4, target.c6, target.c14), strict=True
    ):
        if got is not None and limit is not None and got > limit:
            excess[size] = got - limit
    return CodeComparison(not excess, excess, target)
