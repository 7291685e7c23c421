"""The fleet views on a real server: the watch list across plants, and element lives per
part number whose Weibull is checked against scipy's censored maximum likelihood."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest

from store import record
from store.base.session import fixed_clock
from store.db.book import open_book
from store.health.lives import _lives, live_changes
from store.ledger.entries import BreatherSwap, ElementChange, Reading, Void
from store.server import fleet
from store.server.sync import sync
from tests.kit.plant import fill_register

NOW = datetime(2026, 6, 1, 8, 0, tzinfo=UTC)
T0 = NOW - timedelta(days=400)


def _plant(path, code, url, lives_days, reasons, last_dp, read_days_ago, swap_days_ago):
    """A plant whose P1-RF (element RX-10) lived `lives_days`, each taken out for its reason."""
    with open_book(path, clock=fixed_clock(NOW)) as book:
        book.conn.execute("PRAGMA synchronous = OFF")  # test speed only
        fill_register(book)
        t = T0
        entries = [ElementChange(filter="P1-RF", reason="interval", at=t, by="AB")]
        for days, reason in zip(lives_days, reasons, strict=True):
            t += timedelta(days=days)
            entries.append(ElementChange(filter="P1-RF", reason=reason, at=t, by="AB"))
        at = NOW - timedelta(days=read_days_ago)
        entries.append(Reading(filter="P1-RF", dp_bar=last_dp, temp_c=50, at=at, by="AB"))
        entries.append(
            Reading(filter="P1-PF", dp_bar=1.0, temp_c=50, at=NOW - timedelta(hours=3), by="AB")
        )
        entries.append(BreatherSwap(breather="P1-BR", reason="interval",
                                    at=NOW - timedelta(days=swap_days_ago), by="AB"))  # fmt: skip
        record.log_many(book, entries)
        sync(book, url, plant=code)
        return {
            tag: _lives(changes, [tag]) for tag, changes in [("P1-RF", live_changes(book, None))]
        }


@pytest.fixture
def fleet_server(tmp_path, server):
    north = _plant(tmp_path / "n.db", "NORTH", server.url,
                   [30, 34, 41, 20, 38], ["limit", "limit", "bypass", "damage", "limit"],
                   last_dp=2.6, read_days_ago=1, swap_days_ago=10)  # fmt: skip
    south = _plant(tmp_path / "s.db", "SOUTH", server.url,
                   [25, 29, 33, 12], ["limit", "indicator", "limit", "interval"],
                   last_dp=0.9, read_days_ago=9, swap_days_ago=85)  # fmt: skip
    return server, north, south


def test_watch_list_across_plants(fleet_server):
    server, _, _ = fleet_server
    rows = {(r.plant, r.tag): r for r in fleet.watch(server.url, NOW)}
    # common practice, no source: ΔP at or over the change limit (2.5 bar here) is due now
    assert rows[("NORTH", "P1-RF")].flag == "at limit"
    assert rows[("SOUTH", "P1-RF")].flag == "reading overdue"  # 9 days > its 168 h interval
    assert rows[("SOUTH", "P1-BR")].flag == "swap due"  # 85 of 90 days: due within the week
    assert rows[("NORTH", "P1-PF")].flag == "reading due"  # read 3 h ago, weekly: due in the week
    assert ("NORTH", "P1-BR") not in rows  # swapped 10 days ago, every 90 days
    assert {r.plant for r in fleet.watch(server.url, NOW, plant="SOUTH")} == {"SOUTH"}


def test_element_lives_match_the_book_and_scipy(fleet_server):
    from scipy import stats  # a dependency of the project: the cross-check never skips

    server, north, south = fleet_server
    found = {(e.plant, e.part): e for e in fleet.element_lives(server.url)}
    assert found[("NORTH", "rx-10")].lives == len(north["P1-RF"]) == 5
    assert found[("SOUTH", "rx-10")].lives == len(south["P1-RF"]) == 4
    both = north["P1-RF"] + south["P1-RF"]  # the book's own lives (store.health.lives)
    every = found[("*", "rx-10")]
    assert every.lives == 9 and every.reached == sum(1 for _, r in both if r) == 7
    # cross-check: scipy's maximum likelihood with right-censored lives, location fixed at 0
    data = stats.CensoredData(
        uncensored=[x for x, r in both if r], right=[x for x, r in both if not r]
    )
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    assert every.shape == pytest.approx(shape, rel=2e-3)
    assert every.scale_h == pytest.approx(scale, rel=2e-3)


def test_a_voided_change_is_no_life(tmp_path, fleet_server):
    server, _, _ = fleet_server
    path = tmp_path / "n.db"
    with open_book(path, clock=fixed_clock(NOW)) as book:
        last = book.conn.execute(
            "SELECT id FROM entries WHERE kind = 'change' ORDER BY at_utc DESC LIMIT 1"
        ).fetchone()[0]
        record.log(book, Void(voids=last, note="logged on the wrong filter", by="AB", at=NOW))
        sync(book, server.url)
    north = fleet.element_lives(server.url, plant="NORTH", part="RX-10")
    assert [e.lives for e in north] == [4]


def test_fleet_on_the_command_line(fleet_server, capsys, monkeypatch):
    import json

    from tui.cli import main

    server, _, _ = fleet_server
    monkeypatch.setenv("SUMPBOOK_NOW", NOW.isoformat())
    assert main(["fleet", "due", "--server", server.url, "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert {(r["plant"], r["tag"], r["flag"]) for r in rows} >= {
        ("NORTH", "P1-RF", "at limit"),
        ("SOUTH", "P1-RF", "reading overdue"),
    }
    assert main(["fleet", "lives", "--server", server.url, "--element", "rx-10"]) == 0
    out = capsys.readouterr().out
    assert "all plants" in out and "9 lives, 7 at the limit" in out
    assert main(["fleet", "due", "--server", server.url, "--plant", "SOUTH"]) == 0
    out = capsys.readouterr().out
    assert "SOUTH" in out and "NORTH" not in out


def test_two_readings_of_one_time_show_as_the_book_shows_them(tmp_path, server):
    # A gauge read again and logged with the same time, in one batch: the book's latest is the
    # one written last (0.4 bar, under the 2.5 bar limit), and so is the fleet's. The ids are
    # chosen so that their own order would put the first one (2.6 bar, at the limit) last.
    from store import views

    with open_book(tmp_path / "w.db", clock=fixed_clock(NOW)) as book:
        fill_register(book)
        at = NOW - timedelta(hours=2)
        record.log_many(book, [
            Reading(id="ffffffff-0000-4000-8000-000000000001", filter="P1-RF", dp_bar=2.6,
                    temp_c=50, at=at, by="AB"),
            Reading(id="00000000-0000-4000-8000-000000000002", filter="P1-RF", dp_bar=0.4,
                    temp_c=50, at=at, by="AB"),
        ])  # fmt: skip
        sync(book, server.url, plant="WEST")
        row = next(f for f in views.watch(book).filters if f.filter == "P1-RF")
    assert row.dp_bar == 0.4
    fleet_row = {(r.plant, r.tag): r for r in fleet.watch(server.url, NOW)}[("WEST", "P1-RF")]
    assert fleet_row.dp_bar == 0.4 and fleet_row.flag == "reading due"
