"""Issue 20, case 7 and the small items of case 11: each quantity takes only its own units
(CLI, CSV, prefs), the help's own counts example is taken, and a value just past a range
limit is shown as it was typed."""

from __future__ import annotations

import pytest

from store.base import units
from store.base.errors import BookError
from tests.kit.plant import raw_entry_count as _count
from tests.kit.plant import run_cli as run


@pytest.mark.parametrize(
    "parse, text",
    [
        (units.parse_temperature_c, "100kPa"),
        (units.parse_temperature_c, "3 bar"),
        (units.parse_volume_l, "12 kPa"),
        (units.parse_volume_l, "2 psi"),
        (units.parse_pressure_bar, "1 gal"),
        (units.parse_pressure_bar, "20 C"),
    ],
)
def test_a_unit_of_another_quantity_is_refused(parse, text):
    with pytest.raises(BookError, match="unit"):
        parse(text)


def test_case7_cli_refuses_a_pressure_unit_for_temperature_and_volume(capsys, live):
    before = _count(live)
    code, _, err = run(
        capsys, "--db", str(live), "log", "reading", "M1-R", "--dp", "1", "--temp", "100kPa",
        "--by", "AK",
    )  # fmt: skip
    assert code == 2 and "temperature unit 'kPa'" in err
    code, _, err = run(
        capsys, "--db", str(live), "log", "topup", "PR-3", "--volume", "12 kPa",
        "--unfiltered", "--by", "AK",
    )  # fmt: skip
    assert code == 2 and "volume unit 'kPa'" in err and "unexpected" not in err
    assert _count(live) == before


def test_case7_prefs_refuse_a_unit_of_another_quantity(capsys, live):
    code, _, err = run(capsys, "--db", str(live), "prefs", "temperature=kPa")
    assert code == 2 and "temperature unit" in err
    code, _, err = run(capsys, "--db", str(live), "prefs", "volume=psi")
    assert code == 2 and "volume unit" in err
    assert run(capsys, "--db", str(live), "list", "entries")[0] == 0


def test_case7_csv_with_a_pressure_unit_for_volume_is_refused_whole(capsys, live, tmp_path):
    sheet = tmp_path / "topup.csv"
    sheet.write_text(
        "time,kind,target,by,volume,volume_unit,filtered_um\n"
        "2026-04-03T10:00:00+02:00,topup,PR-3,AK,12,kPa,10\n",
        encoding="utf-8",
    )
    before = _count(live)
    code, _, err = run(capsys, "--db", str(live), "import", str(sheet))
    assert code == 2 and "volume unit 'kPa'" in err and "unexpected" not in err
    assert _count(live) == before


def test_case11_the_helps_counts_example_is_taken(capsys, live):
    before = _count(live)
    code, _, err = run(
        capsys, "--db", str(live), "log", "sample", "PR-3", "--counts", "-/500/60", "--by", "AK"
    )
    assert code == 0, err
    assert _count(live) == before + 1


def test_case11_a_value_just_past_a_limit_is_shown_as_typed(capsys, live):
    code, _, err = run(
        capsys, "--db", str(live), "log", "reading", "M1-R", "--dp", "1", "--temp", "150.0001",
        "--by", "AK",
    )  # fmt: skip
    # the range is -40 … 150 °C (store/base/validate.py RANGES; common practice, no source)
    assert code == 2 and "150.0001" in err
