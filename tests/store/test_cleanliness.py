import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from store.base.errors import BookError
from store.physics.cleanliness import (
    OVER_28,
    CleanlinessCode,
    code_from_counts,
    compare_to_target,
    parse_code,
    scale_number,
)

# ISO 4406 Table 1 as reproduced in REFERENCES.md §1b: (scale, more than, up to and including)
ISO_4406_ROWS = [
    (0, 0.0, 0.01),
    (1, 0.01, 0.02),
    (2, 0.02, 0.04),
    (3, 0.04, 0.08),
    (4, 0.08, 0.16),
    (5, 0.16, 0.32),
    (6, 0.32, 0.64),
    (7, 0.64, 1.3),
    (8, 1.3, 2.5),
    (9, 2.5, 5.0),
    (10, 5.0, 10.0),
    (11, 10.0, 20.0),
    (12, 20.0, 40.0),
    (13, 40.0, 80.0),
    (14, 80.0, 160.0),
    (15, 160.0, 320.0),
    (16, 320.0, 640.0),
    (17, 640.0, 1_300.0),
    (18, 1_300.0, 2_500.0),
    (19, 2_500.0, 5_000.0),
    (20, 5_000.0, 10_000.0),
    (21, 10_000.0, 20_000.0),
    (22, 20_000.0, 40_000.0),
    (23, 40_000.0, 80_000.0),
    (24, 80_000.0, 160_000.0),
    (25, 160_000.0, 320_000.0),
    (26, 320_000.0, 640_000.0),
    (27, 640_000.0, 1_300_000.0),
    (28, 1_300_000.0, 2_500_000.0),
]


@pytest.mark.parametrize(("scale", "more_than", "up_to"), ISO_4406_ROWS)
def test_every_row_boundary(scale, more_than, up_to):
    # ISO 4406 Table 1, REFERENCES.md §1b: upper limit inclusive, lower limit exclusive
    assert scale_number(up_to) == scale
    assert scale_number(math.nextafter(up_to, math.inf)) == scale + 1
    assert scale_number(math.nextafter(more_than, math.inf)) == scale
    assert scale_number((more_than + up_to) / 2) == scale


def test_zero_count_and_over_28():
    # ISO 4406 Table 1, REFERENCES.md §1b: row 0 starts at 0; above 2 500 000 is ">28"
    assert scale_number(0.0) == 0
    assert scale_number(2_500_001.0) == OVER_28
    assert scale_number(1e12) == OVER_28


@pytest.mark.parametrize(
    ("count", "scale"),
    [
        # ISO 4406 Table 1 rounded limits, REFERENCES.md §1b; ceil(log2(n / 0.01)) gets these wrong
        (1.3, 7),
        (2.5, 8),
        (80.0, 13),
        (1_300.0, 17),
        (2_500.0, 18),
        (1_300_000.0, 27),
        (2_500_000.0, 28),
        (1.29, 7),
        (2.6, 9),
        (81.0, 14),
        (1_310.0, 18),
    ],
)
def test_non_doubling_rows(count, scale):
    assert scale_number(count) == scale


@pytest.mark.parametrize(
    ("counts", "code"),
    [
        # micronscientific worked example, REFERENCES.md §1c: 300 000 / 50 000 / 700 per 100 mL
        ((300_000 / 100, 50_000 / 100, 700 / 100), "19/16/10"),
        ((2_000.0, 500.0, 60.0), "18/16/13"),  # REFERENCES.md §1c, table lookup
        ((150.0, 30.0, 1.0), "14/12/7"),  # REFERENCES.md §1c (the ≥ flag is not kept)
        ((30_000.0, 5_000.0, 60.0), "22/19/13"),  # REFERENCES.md §1c, table lookup
        ((1_300.0, 640.0, 80.0), "17/16/13"),  # REFERENCES.md §1c, exactly on the upper limits
        ((3_000_000.0, 1.0, 1.0), ">28/7/7"),  # REFERENCES.md §1c
        ((None, 2_000.0, 60.0), "-/18/13"),  # two-part code form, REFERENCES.md §1a
    ],
)
def test_worked_codes(counts, code):
    assert str(code_from_counts(*counts)) == code


def test_single_number_examples():
    # cbmconnect example, REFERENCES.md §1c: 3 471 /mL at ≥4 µm → 19
    assert scale_number(3_471.0) == 19
    # REFERENCES.md §1b warning: 1 024 per 100 mL is 10.24 per mL → 11
    assert scale_number(1_024 / 100) == 11
    # constructionequipment.com row checks, REFERENCES.md §1c: 17 → 640–1 300, 10 → 5–10
    assert scale_number(641.0) == scale_number(1_300.0) == 17
    assert scale_number(5.01) == scale_number(10.0) == 10


@given(a=st.floats(0.0, 1e8), b=st.floats(0.0, 1e8))
def test_scale_number_is_monotonic(a, b):
    # ISO 4406 Table 1: more particles never give a lower scale number
    lo, hi = sorted((a, b))
    assert scale_number(lo) <= scale_number(hi)


@given(a=st.floats(0.02, 2_500_000.0))
def test_scale_step_is_about_a_doubling(a):
    # ISO 4406:2021 cl. 4.1: step ratio generally two, REFERENCES.md §1a
    assert scale_number(2 * a) - scale_number(a) in (0, 1, 2)
    assert scale_number(4 * a) - scale_number(a) in (1, 2, 3)


# ---------------------------------------------------------------- parsing and printing


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("18/16/13", CleanlinessCode(18, 16, 13)),
        ("-/16/13", CleanlinessCode(None, 16, 13)),
        (" 18 / 16 / 13 ", CleanlinessCode(18, 16, 13)),
        (">28/7/7", CleanlinessCode(OVER_28, 7, 7)),
        ("14/12/≥7", CleanlinessCode(14, 12, 7)),  # form of the ISO 4406 note, REFERENCES.md §1a
        ("22/18/13", CleanlinessCode(22, 18, 13)),  # example code, REFERENCES.md §1a
    ],
)
def test_parse_code(text, expected):
    assert parse_code(text) == expected


@given(
    c4=st.one_of(st.none(), st.integers(0, OVER_28)),
    c6=st.integers(0, OVER_28),
    c14=st.integers(0, OVER_28),
)
def test_print_parse_round_trip(c4, c6, c14):
    code = CleanlinessCode(c4, c6, c14)
    assert parse_code(str(code)) == code


def test_print_forms():
    assert str(CleanlinessCode(18, 16, 13)) == "18/16/13"
    assert str(CleanlinessCode(None, 18, 13)) == "-/18/13"
    assert str(CleanlinessCode(OVER_28, 7, 7)) == ">28/7/7"


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("", "not an ISO 4406 code"),
        ("18/16", "not an ISO 4406 code"),
        ("18/16/13/11", "not an ISO 4406 code"),
        ("eighteen", "not an ISO 4406 code"),
        ("18.5/16/13", "not an ISO 4406 code"),
        ("18/-/13", "may be '-'"),
        ("30/16/13", "stop at 28"),
    ],
)
def test_parse_junk(text, words):
    with pytest.raises(BookError, match=words) as info:
        parse_code(text)
    assert "\n" not in str(info.value)


def test_bad_counts_and_codes():
    for bad in (-1.0, float("nan"), float("inf")):
        with pytest.raises(BookError, match="0 or more per mL"):
            scale_number(bad)
    with pytest.raises(BookError, match="cannot rise with particle size"):
        code_from_counts(100.0, 500.0, 7.0)  # fewer ≥4 than ≥6 is impossible for cumulative counts
    with pytest.raises(BookError, match="0 to >28"):
        CleanlinessCode(18, 31, 13)
    with pytest.raises(BookError, match="0 to >28"):
        CleanlinessCode(18, None, 13)  # type: ignore[arg-type]


# ---------------------------------------------------------------- target comparison


def test_compare_meets_and_describe():
    # target codes of REFERENCES.md §7c (e.g. 17/15/12 for a variable piston pump at 210 bar)
    target = parse_code("17/15/12")
    result = compare_to_target(parse_code("16/15/11"), target)
    assert result.meets and result.excess_steps == {}
    assert result.describe() == "meets 17/15/12"


def test_compare_over_target():
    target = parse_code("17/15/12")
    result = compare_to_target(parse_code("19/15/13"), target)
    assert not result.meets
    assert result.excess_steps == {"≥4": 2, "≥14": 1}
    assert result.describe() == "≥4 µm +2, ≥14 µm +1 over 17/15/12"


def test_compare_two_part_codes_skip_the_4_micron_number():
    target = parse_code("17/15/12")
    assert compare_to_target(parse_code("-/15/12"), target).meets
    assert compare_to_target(parse_code(">28/15/12"), parse_code("-/15/12")).meets
    over = compare_to_target(parse_code(">28/16/12"), target)
    assert over.excess_steps == {"≥4": OVER_28 - 17, "≥6": 1}
