"""One "most urgent first" order for the app and `sumpbook status` (issue 24), defined in
store/health/urgency.py."""

from __future__ import annotations

import itertools
import json
import shutil

from store.db.book import open_book
from store.health import urgency
from store.sheets import watch_rows
from store.views import watch
from tui.cli import main


def demo_copy(demo_file, tmp_path, monkeypatch):
    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())
    return path


def table_tags(out: str) -> list[str]:
    return [line.split("│")[1].strip() for line in out.splitlines() if line.startswith("│")]


def test_status_lists_every_line_in_the_apps_order_with_overdue_said(
    demo_file, tmp_path, monkeypatch, capsys
):
    path = demo_copy(demo_file, tmp_path, monkeypatch)
    assert main(["--db", str(path), "status"]) == 0
    out = capsys.readouterr().out
    with open_book(path, create=False) as book:
        rows = watch_rows(watch(book))
    assert table_tags(out) == [r.tag for r in rows]  # breathers and units among the filters
    # D2-BR's swap was due on 05 Nov: second in the app, and now in `status` too, with the word
    d2br = next(line for line in out.splitlines() if line.startswith("│ D2-BR"))
    assert "OVERDUE" in d2br
    assert table_tags(out).index("D2-BR") <= 2


def test_status_json_filters_follow_the_same_order(demo_file, tmp_path, monkeypatch, capsys):
    path = demo_copy(demo_file, tmp_path, monkeypatch)
    assert main(["--db", str(path), "status", "--json"]) == 0
    filters = [f["filter"] for f in json.loads(capsys.readouterr().out)["filters"]]
    with open_book(path, create=False) as book:
        rows = [r.tag for r in watch_rows(watch(book)) if r.what == "filter"]
    assert filters == rows


def test_a_notice_does_not_outrank_a_nearer_date():
    # COLD START is a caution for cold mornings: a plain line due sooner comes first
    from datetime import UTC, datetime

    soon, later = datetime(2026, 12, 1, tzinfo=UTC), datetime(2026, 12, 20, tzinfo=UTC)
    cold = urgency.order_key(("cold-start-bypass",), False, later, 60.0, "A")
    plain = urgency.order_key((), False, soon, 40.0, "B")
    assert plain < cold
    step = urgency.order_key(("step-up",), False, later, 40.0, "C")
    assert step < plain  # a flag that asks for a look does
    drop = urgency.order_key(("dp-drop",), False, None, 10.0, "D")
    overdue = urgency.order_key((), True, soon, 90.0, "E")
    assert drop < overdue < step


def test_status_at_80_columns_keeps_each_line_on_one_line(demo_file, tmp_path, monkeypatch):
    # issue 24: at 80 columns due dates wrapped over up to 7 lines and flags were cut
    from rich.console import Console

    from store.base.prefs import Prefs
    from tui.base.render import watch_table

    path = demo_copy(demo_file, tmp_path, monkeypatch)
    console = Console(width=80, record=True, file=open(tmp_path / "out.txt", "w"))  # noqa: SIM115
    with open_book(path, create=False) as book:
        w = watch(book)
        tags = [r.tag for r in watch_rows(w)]
        console.print(watch_table(book, w, Prefs(), width=80))
    lines = console.export_text().splitlines()
    assert max(len(line) for line in lines) <= 80
    assert "…" not in "\n".join(lines)  # nothing cut
    starts = [line.split()[0] for line in lines[3:] if line.strip() and not line.startswith("   ")]
    assert [s for s in starts if s in tags] == tags  # every line starts with its tag, in order
    d2r = next(line for line in lines if line.split()[:1] == ["D2-R"])
    assert "29 Nov (29 Nov–" in d2r  # the due date on the tag's own line


def test_the_order_holds_once_likely_dates_have_passed(demo_file, tmp_path, monkeypatch, capsys):
    # three weeks on, likely change dates lie in the past (M1-R's with no overdue state of
    # its own): the JSON's order and the app's are still the one order, both now taking
    # "overdue" from urgency.filter_overdue
    from datetime import timedelta

    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:  # the demo's clock stands in its settings
        later = book.now() + timedelta(days=21)
        with book.atomic():
            book.set_setting("clock", later.strftime("%Y-%m-%dT%H:%M:%SZ"))
    assert main(["--db", str(path), "status", "--json"]) == 0
    filters = [f["filter"] for f in json.loads(capsys.readouterr().out)["filters"]]
    with open_book(path, create=False) as book:
        assert book.now() == later
        w = watch(book)
        passed = [f for f in w.filters if f.due and f.due.likely <= later]
        assert passed and any(f.state not in urgency.OVERDUE_STATES for f in passed)
        rows = [r.tag for r in watch_rows(w) if r.what == "filter"]
    assert filters == rows


def test_the_tiers_follow_their_rule_for_every_mix_of_flags():
    # The rule in tier's docstring, spelled out over every mix of up to two flags (common
    # practice, no source): any urgent flag first, then overdue or over the limit, then any
    # flag that is more than a notice, then nothing pressing.
    names = [*urgency.URGENT_FLAGS, *urgency.NOTICE_FLAGS, "over-limit", "hot", "leak-suspect"]
    mixes = [()] + [(f,) for f in names] + list(itertools.permutations(names, 2))
    for flags in mixes:
        for overdue in (False, True):
            if any(f in urgency.URGENT_FLAGS for f in flags):
                want = 0
            elif overdue or "over-limit" in flags:
                want = 1
            elif any(f not in urgency.NOTICE_FLAGS for f in flags):
                want = 2
            else:
                want = 3
            assert urgency.tier(flags, overdue) == want, (flags, overdue)
            assert urgency.tier(iter(flags), overdue) == want  # any iterable of flags
