"""A spreadsheet's times are judged by the book's clock, as every other door judges them.

"More than a day ahead" is measured from the clock the book runs on: the computer's, or the
one fixed for the session (`SUMPBOOK_NOW`: the tests, the demos, the closed-loop benchmark)
or frozen in the book (the demo plant). `log --at` and a merge measure from it; an import
measured from the computer's own clock instead, and so refused rows that every other door
took (and took rows the other doors refuse only at the second check).
"""

from __future__ import annotations

import shutil
import sqlite3
from datetime import timedelta

import pytest

from store.base.timeutil import utc_now
from tests.kit.plant import raw_entry_count, run_cli


@pytest.fixture
def unfrozen(demo_file, tmp_path):
    """The demo plant without its frozen clock: the session's clock decides."""
    path = tmp_path / "b.db"
    shutil.copy(demo_file, path)
    conn = sqlite3.connect(path)
    with conn:
        conn.execute("DELETE FROM settings WHERE key = 'clock'")
    conn.close()
    return path


@pytest.mark.parametrize("offset_days", [40, -40], ids=["clock-ahead", "clock-behind"])
def test_an_import_takes_what_log_at_takes_and_refuses_what_it_refuses(
    unfrozen, tmp_path, capsys, monkeypatch, offset_days
) -> None:
    clock = (utc_now() + timedelta(days=offset_days)).replace(microsecond=0)
    monkeypatch.setenv("SUMPBOOK_NOW", clock.isoformat())
    for hours, ok in ((-2, True), (30, False)):  # two hours before the clock; a day and more after
        at = (clock + timedelta(hours=hours)).strftime("%Y-%m-%dT%H:%M:%SZ")
        before = raw_entry_count(unfrozen)
        logged, _, log_err = run_cli(
            capsys, "--db", str(unfrozen), "log", "reading", "M1-R", "--dp", "0.4", "--temp", "45",
            "--at", at, "--by", "AK",
        )  # fmt: skip
        sheet = tmp_path / f"sheet{hours}.csv"
        sheet.write_text(f"time,kind,target,by,dp_bar,temp_c\n{at},reading,M1-R,AK,0.5,46\n")
        imported, _, import_err = run_cli(capsys, "--db", str(unfrozen), "import", str(sheet))
        assert (logged == 0, imported == 0) == (ok, ok), (log_err, import_err)
        assert raw_entry_count(unfrozen) == before + (2 if ok else 0)
        if not ok:  # both name the clock they measured from: the session's
            assert f"({clock:%Y-%m-%d %H:%M} UTC)" in log_err
            assert f"({clock:%Y-%m-%d %H:%M} UTC)" in import_err
