"""The fast paths for big books give exactly what a computation from every entry gives.

The derived tables (element summaries, filter and unit statuses) are kept up to date as entries
arrive; here random sequences of writes (late readings, voids of readings and of element
changes, batches, top-ups, samples, register changes, rows written without the hooks) are
checked against a fresh computation from the entries after every few writes, and a rebuild
(on one core and in worker processes) must store the same rows. No timing here: that is
tests/benchmarks/speed.py.
"""

from __future__ import annotations

import math
import random
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from store import record, sheets, views
from store.base.timeutil import format_utc
from store.db.book import Book, open_book
from store.derived import elementcache, statuscache
from store.health import lives, status, status_json, status_model
from store.health.conditions import contexts
from store.ledger import journal, register
from store.ledger.entries import ElementChange, Note, Reading, Sample, TopUp, Void, from_row
from store.ledger.register import FilterPosition, Fluid, Technician, Unit, list_all
from tests.benchmarks import make_big_logbook

CLOCK = datetime(2026, 6, 1, 12, 0, tzinfo=UTC)
START = CLOCK - timedelta(days=150)


def plant(path: Path) -> Book:
    """Two invented units: one with an hour meter; two positions sharing an element (in
    different case), one indicator-only position."""
    book = open_book(path)
    register.add(book, Technician(tag="AB"))
    # an invented ISO VG 46 mineral oil (ν40 46, ν100 6.8 mm²/s, VI about 100)
    register.add(book, Fluid(tag="HM46", iso_vg=46, nu40_cst=46.0, nu100_cst=6.8))
    register.add(book, Unit(tag="U1", fluid="HM46", normal_temp_c=50, max_temp_c=60,
                            coldest_start_c=20, reservoir_l=400))  # fmt: skip
    register.add(book, Unit(tag="U2", fluid="HM46", normal_temp_c=45, max_temp_c=58,
                            coldest_start_c=25, hour_meter=True))  # fmt: skip
    for tag, unit, kind, element, limit, bypass, clean, gauge in (
        ("U1-RF", "U1", "return", "RX-10", 2.5, 3.5, 0.4, True),
        ("U2-RF", "U2", "return", "rx-10", 2.5, 3.5, 0.4, True),
        ("U1-PF", "U1", "pressure", "PX-3", 5.0, 7.0, 0.8, False),
        ("U2-OF", "U2", "offline", "OX-6", 2.0, 2.5, 0.25, True),
    ):
        register.add(book, FilterPosition(tag=tag, unit=unit, kind=kind, element=element,
                                          rating_um=10, limit_bar=limit, bypass_bar=bypass,
                                          clean_bar=clean, normal_flow_lpm=100, gauge=gauge,
                                          reading_interval_h=24))  # fmt: skip
    book.set_setting("clock", format_utc(CLOCK))
    return book


def live_entries(book: Book, tag: str) -> list:
    return [e for e in journal.read(book, filter=tag) if not e.voided]


def fresh_status(book: Book, ctx) -> status_model.FilterStatus:
    """The reference: every live entry of the position, split and fitted from scratch."""
    entries = live_entries(book, ctx.position.tag)
    return status.filter_status(ctx, entries, book.now(), lives.like_lives(book, ctx, None))


def assert_cache_is_fresh(book: Book) -> None:
    now = book.now()
    ctxs = contexts(book)
    fresh = {tag: fresh_status(book, ctx) for tag, ctx in ctxs.items()}
    # The rows the hooks kept whose key holds, brought to the clock, say what a fresh
    # computation says.
    for tag, kept in statuscache.kept_filters(book, list(fresh), now).items():
        assert statuscache._encode(kept) == statuscache._encode(fresh[tag]), tag
    # The live path (element cache + the element in service) gives the very same status.
    for tag, ctx in ctxs.items():
        live, _ = statuscache.live_status(book, ctx, now)
        assert live == fresh[tag], tag
        assert live.history == fresh[tag].history
    # The watch list read from the caches is the one computed as of now from the entries.
    cached, audit = views.watch(book), views.watch(book, as_of=now)
    assert [statuscache._encode(f) for f in cached.filters] == [
        statuscache._encode(f) for f in audit.filters
    ]
    assert cached.units == audit.units
    # The filter sheet from the element cache shows what it shows computed from the entries.
    for tag in ctxs:
        quick, full = sheets.filter_sheet(book, tag), sheets.filter_sheet(book, tag, as_of=now)
        assert quick.elements == full.elements, tag
        assert quick.uses_hours == full.uses_hours, tag
        assert statuscache._encode(quick.status) == statuscache._encode(full.status), tag
        assert quick.status.history == full.status.history, tag


class Writer:
    """Random but plausible writes: loading elements, changes, late and mistyped readings."""

    def __init__(self, book: Book, seed: int) -> None:
        self.book, self.rng = book, random.Random(seed)
        self.t = START
        self.hours = 1000.0
        self.start = {tag: START for tag in contexts(book)}
        self.written: list[str] = []

    def reading(self, tag: str, at: datetime) -> Reading:
        ctx = contexts(self.book)[tag]
        pos = ctx.position
        age_d = max((at - self.start[tag]).total_seconds() / 86400, 0)
        dp = pos.clean_bar + (pos.limit_bar - pos.clean_bar) * min(age_d / 40, 1.3) ** 2
        temp = self.rng.choice([35.0, 45.0, 50.0, 52.0, 55.0, 61.0])
        hours = self.hours if ctx.unit.hour_meter else None
        if not pos.gauge:
            return Reading(filter=tag, indicator="dirty" if dp >= pos.limit_bar else "clean",
                           temp_c=temp, hours=hours, by="AB", at=at)  # fmt: skip
        dp = round(dp * self.rng.uniform(0.95, 1.05) / 0.05) * 0.05
        return Reading(filter=tag, dp_bar=round(dp, 2), temp_c=temp, hours=hours, by="AB", at=at)

    def step(self) -> None:
        rng, book = self.rng, self.book
        self.t += timedelta(hours=rng.uniform(4, 14))
        self.hours += rng.uniform(3, 10)
        tag = rng.choice(sorted(self.start))
        roll = rng.random()
        if roll < 0.55:
            entry = self.reading(tag, self.t)
        elif roll < 0.67:
            entry = ElementChange(filter=tag, by="AB", at=self.t, hours=self.hours,
                                  reason=rng.choice(["limit", "limit", "interval", "damage"]))  # fmt: skip
            self.start[tag] = self.t
        elif roll < 0.75:  # logged late: dated back, perhaps before the last change
            entry = self.reading(tag, self.t - timedelta(days=rng.uniform(1, 30)))
            entry = replace(entry, hours=None)  # the meter then is not known any more
        elif roll < 0.83 and self.written:
            target = journal.find_entry(book, rng.choice(self.written))
            if target.voided or target.kind == "void":
                return
            entry = Void(voids=target.id, note="typed wrong", by="AB", at=self.t)
        elif roll < 0.88:
            entry = TopUp(unit=rng.choice(["U1", "U2"]), volume_l=rng.choice([5.0, 20.0]),
                          filtered_um=rng.choice([None, 3.0]), by="AB", at=self.t)  # fmt: skip
        elif roll < 0.92:
            entry = Sample(unit="U1", c4_per_ml=4000, c6_per_ml=900, c14_per_ml=70, by="AB",
                           at=self.t)  # fmt: skip
        elif roll < 0.95:
            entry = Note(unit="U2", note="hose checked", by="AB", at=self.t)
        else:  # a batch: after_write runs once per filter, with its last entry only
            change = ElementChange(filter=tag, by="AB", at=self.t, hours=self.hours)
            self.start[tag] = self.t
            later = self.t + timedelta(hours=2)
            done = record.log_many(book, [change, self.reading(tag, later)])
            self.written += [e.id for e in done]
            return
        self.written.append(record.log(book, entry).id)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_cache_stays_equal_to_a_fresh_computation(tmp_path: Path, seed: int) -> None:
    book = plant(tmp_path / "book.db")
    writer = Writer(book, seed)
    for i in range(90):
        writer.step()
        if i % 15 == 14:
            assert_cache_is_fresh(book)
    assert_cache_is_fresh(book)
    elements = book.conn.execute("SELECT count(*) FROM element_cache").fetchone()[0]
    assert elements > 0  # the sequence did close elements, so the cache was exercised


def test_rebuild_stores_the_same_rows_each_time(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 7)
    for _ in range(80):
        writer.step()

    def rows() -> tuple:
        return tuple(
            book.conn.execute(f"SELECT * FROM {table} ORDER BY 1, 2").fetchall()
            for table in ("element_cache", "element_state")
        ) + (book.conn.execute("SELECT filter, data FROM status_cache ORDER BY 1").fetchall(),)

    statuscache.rebuild(book)
    first = rows()
    assert_cache_is_fresh(book)
    statuscache.rebuild(book)
    assert rows() == first


def test_entries_written_without_the_hooks_are_noticed(tmp_path: Path) -> None:
    """A merge or a bulk load may write entries without running the hooks: a late reading
    inside an old element, a void of an old change. The element cache sees them itself."""
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 11)
    for _ in range(60):
        writer.step()
    changes = [e for e in journal.read(book, filter="U1-RF", kinds=["change"]) if not e.voided]
    assert len(changes) >= 2
    first, second = changes[0], changes[1]
    late = Reading(id="00000000-0000-4000-8000-000000000001", filter="U1-RF", unit="U1",
                   dp_bar=1.0, temp_c=50.0, by="AB", at=first.at + (second.at - first.at) / 2,
                   logged=CLOCK)  # fmt: skip
    void = Void(id="00000000-0000-4000-8000-000000000002", voids=second.id, note="wrong tag",
                by="AB", at=CLOCK, logged=CLOCK)  # fmt: skip
    with book.atomic():  # the rows only: no derived-row upkeep
        journal.insert(book, late)
        journal.insert(book, void)
    ctx = contexts(book)["U1-RF"]
    live, _ = statuscache.live_status(book, ctx)
    assert live == fresh_status(book, ctx)
    summaries = elementcache.elements_now(book, ctx).past
    assert second.id not in [el.removal_id for el in summaries]


def test_the_sheet_takes_the_next_reading_of_a_kept_row_only_where_it_holds(
    tmp_path: Path, monkeypatch
) -> None:
    """The filter sheet works out everything but its next reading, which is the kept row's
    where the row holds (the list shows that one too): the same as computing it again."""
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 7)
    for _ in range(80):
        writer.step()
    taken: list[bool] = []
    real = statuscache._kept_plan
    monkeypatch.setattr(
        statuscache, "_kept_plan", lambda kept: taken.append(kept is not None) or real(kept)
    )
    ctxs = contexts(book)
    for tag, ctx in ctxs.items():
        assert statuscache.filter_view(book, tag)[0] == fresh_status(book, ctx), tag
    assert taken == [True] * len(ctxs)  # the hooks kept every row
    last = journal.read(book, filter="U1-RF", kinds=["reading"], newest_first=True, limit=1)[0]
    late = Reading(id="00000000-0000-4000-8000-000000000003", filter="U1-RF", unit="U1",
                   dp_bar=1.0, temp_c=50.0, by="AB", at=last.at - timedelta(minutes=5),
                   logged=CLOCK)  # fmt: skip
    with book.atomic():  # the row only: U1-RF's kept row no longer holds
        journal.insert(book, late)
    taken.clear()
    assert statuscache.filter_view(book, "U1-RF")[0] == fresh_status(book, ctxs["U1-RF"])
    assert taken == [False]


def test_a_save_landing_while_the_sheet_reads_is_not_half_seen(tmp_path: Path, monkeypatch) -> None:
    """The sheet reads its entries and the kept row in one snapshot: a save committed by
    another connection between the two reads (a laptop's second window, the command line)
    is seen by neither, not by the kept row alone (whose next reading would then be the new
    reading's, beside the older readings)."""
    path = tmp_path / "book.db"
    book = plant(path)
    writer = Writer(book, 7)
    for _ in range(80):
        writer.step()
    before, _ = statuscache.filter_view(book, "U1-RF")
    other = open_book(path)
    last = journal.read(other, filter="U1-RF", kinds=["reading"], newest_first=True, limit=1)[0]
    real = statuscache.elements_now
    saved: list[bool] = []

    def then_a_save(book_, ctx, **kwargs):  # noqa: ANN001, ANN202
        els = real(book_, ctx, **kwargs)
        if book_ is book and not saved:  # once, from the sheet's read (the save reads too)
            saved.append(True)
            record.log(other, replace(last, id=None, dp_bar=last.dp_bar + 0.05,
                                      at=last.at + timedelta(hours=2), logged=None))  # fmt: skip
        return els

    monkeypatch.setattr(statuscache, "elements_now", then_a_save)
    during, _ = statuscache.filter_view(book, "U1-RF")
    monkeypatch.setattr(statuscache, "elements_now", real)
    after, _ = statuscache.filter_view(book, "U1-RF")
    other.close()
    assert saved
    assert during == before  # the book as it stood when the sheet began to read
    assert after.next_reading != before.next_reading  # the save did move it
    assert after == fresh_status(book, contexts(book)["U1-RF"])


def test_the_sheet_and_its_status_are_of_one_time(tmp_path: Path, monkeypatch) -> None:
    """A sheet says the time it is of (`as_of`) and shows the status worked out at that very
    time: on a clock that moves between two reads, the element's age is its age then."""
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 3)
    for _ in range(40):
        writer.step()
    ticks = iter(range(1000))
    start = book.now()
    monkeypatch.setattr(Book, "now", lambda self: start + timedelta(minutes=next(ticks)))
    sheet = sheets.filter_sheet(book, "U1-RF")
    clock = sheet.status.clock
    assert sheet.status.element_age_h == clock.age_h(sheet.as_of)


def test_a_register_change_that_alters_normalising_is_noticed(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 5)
    for _ in range(60):
        writer.step()
    register.update(book, Unit, "U2", {"normal_temp_c": 40.0})
    register.update(book, Fluid, "HM46", {"nu100_cst": 7.2})
    assert_cache_is_fresh(book)


def test_a_change_on_a_like_position_stales_those_that_pool_with_it(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    t = START
    # U2-RF: two elements removed at the limit (fewer than three: it pools with U1-RF)
    for days in (0, 20, 41):
        record.log(book, ElementChange(filter="U2-RF", by="AB", at=t + timedelta(days=days),
                                        hours=1000 + 10 * days))  # fmt: skip
    for days in (0, 25, 52, 70):
        record.log(book, ElementChange(filter="U1-RF", by="AB", at=t + timedelta(days=days)))
    # U1-RF's changes came after U2-RF's row was kept: it does not hold until refreshed
    stale = statuscache.stale_filters(book)
    assert "U2-RF" in stale and "U1-RF" not in stale
    statuscache.refresh_stale(book)
    assert "U2-RF" in statuscache.kept_filters(book, ["U2-RF"], book.now())
    record.log(book, ElementChange(filter="U1-RF", by="AB", at=t + timedelta(days=90)))
    # its key no longer holds (a like position's lives moved): every reader computes it
    assert statuscache.kept_filters(book, ["U2-RF", "U1-RF"], book.now()).keys() == {"U1-RF"}
    assert statuscache.stale_filters(book) == ["U2-RF"]
    assert_cache_is_fresh(book)
    statuscache.refresh_stale(book)
    assert statuscache.stale_filters(book) == []


def test_reading_back_builds_the_entries_from_row_builds(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 3)
    for _ in range(60):
        writer.step()
    reference = [
        from_row(row)
        for row in book.db.query(
            "SELECT e.*, v.id AS voided_by FROM entries e LEFT JOIN entries v ON v.voids = e.id "
            "ORDER BY e.at_utc, e.rowid"
        )
    ]
    fast = journal.read(book)
    assert fast == reference
    assert [e.voided_by for e in fast] == [e.voided_by for e in reference]
    assert [type(e) for e in fast] == [type(e) for e in reference]
    assert journal.read(book, kinds=["topup", "sample"]) == [
        e for e in reference if e.kind in ("topup", "sample")
    ]


def test_the_new_indexes_serve_the_event_queries(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")

    def plan(sql: str, params: list) -> str:
        return " ".join(str(r) for r in book.conn.execute("EXPLAIN QUERY PLAN " + sql, params))

    sql, params = journal._query(None, None, "U1", None, None, ["topup"], True, False, None, None)
    assert "entries_unit_events" in plan(sql, params)
    changes = lives.LIVE_CHANGES_SQL.format(where=" AND e.filter IN (?)", void_until="")
    assert "entries_filter_changes" in plan(changes, ["U1-RF"])


def test_generated_big_book_in_small(tmp_path: Path) -> None:
    """The benchmark's generator at toy size: a sound book whose cache is fresh."""
    path = tmp_path / "big.db"
    times = make_big_logbook.build(2, 0.25, path, seed=9, end=CLOCK)
    with open_book(path) as book:
        assert book.conn.execute("PRAGMA integrity_check").fetchone() == ("ok",)
        assert book.conn.execute("PRAGMA foreign_key_check").fetchall() == []
        count = journal.count(book)
        assert count == times["entries"]
        # 8 positions read every shift for a quarter of a year: about 8 * 3 * 91 readings
        readings = book.conn.execute("SELECT count(*) FROM entries WHERE kind = 'reading'")
        assert math.isclose(readings.fetchone()[0], 8 * 3 * 91, rel_tol=0.05)
        assert len(list_all(book, FilterPosition)) == 8
        assert_cache_is_fresh(book)


def derived_rows(book: Book) -> list:
    return [
        book.conn.execute(f"SELECT * FROM {table} ORDER BY 1, 2").fetchall()
        for table in ("status_cache", "unit_cache", "element_cache", "element_state", "kept_seen")
    ]


@pytest.mark.parametrize("later", [timedelta(days=2), timedelta(weeks=1), timedelta(days=365)])
def test_kept_rows_hold_later_on_and_reads_write_nothing(tmp_path: Path, later) -> None:
    # A plant back from a shutdown week (or a year): no row is too old to use, what moves
    # with the clock (age, overdue, check-now, hot, top-up windows) is worked out at read
    # time and matches a computation from every entry, flag by flag and date by date.
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 13)
    for _ in range(40):
        writer.step()
    kept = derived_rows(book)
    before = views.watch(book)
    book.set_setting("clock", format_utc(CLOCK + later))
    assert statuscache.stale_filters(book) == []
    cached, audit = views.watch(book), views.watch(book, as_of=book.now())
    assert [statuscache._encode(f) for f in cached.filters] == [
        statuscache._encode(f) for f in audit.filters
    ]
    assert cached.units == audit.units
    assert status_json.to_json(cached) == status_json.to_json(audit)
    # The clock's parts did move (the test is not comparing two unchanged lists).
    ages = {f.filter: f.element_age_h for f in before.filters}
    assert all(f.element_age_h > ages[f.filter] for f in cached.filters)
    assert any("reading-overdue" in f.flags for f in cached.filters)
    assert_cache_is_fresh(book)
    assert derived_rows(book) == kept  # reading wrote nothing


def test_rows_whose_key_moved_are_computed_and_caught_up_behind(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    writer = Writer(book, 13)
    for _ in range(40):
        writer.step()
    with book.atomic():  # rows of another format: none holds
        book.conn.execute("UPDATE status_cache SET key = 'x' || key")
    ctxs = list(contexts(book).values())
    stale = statuscache.stale_filters(book)
    assert sorted(stale) == sorted(c.position.tag for c in ctxs)
    kept = derived_rows(book)
    shown = views.watch(book)  # computed in memory, nothing written
    assert {f.filter for f in shown.filters} == {c.position.tag for c in ctxs}
    assert_cache_is_fresh(book)
    assert derived_rows(book) == kept
    done = statuscache.refresh_stale(book)  # the explicit refresh keeps them
    assert sorted(done) == sorted(stale)
    assert statuscache.stale_filters(book) == []
    assert_cache_is_fresh(book)


def test_unit_rows_follow_top_ups_hot_readings_and_the_register(tmp_path: Path) -> None:
    book = plant(tmp_path / "book.db")
    at = CLOCK - timedelta(days=60)
    for week in range(8):  # a steady 5 L a week, then a hot reading and an unfiltered fill
        record.log(book, TopUp(unit="U1", volume_l=5, filtered_um=3, by="AB",
                                at=at + timedelta(weeks=week)))  # fmt: skip
    record.log(book, Reading(filter="U1-RF", dp_bar=1.0, temp_c=66.0, by="AB",
                              at=CLOCK - timedelta(days=1)))  # fmt: skip
    record.log(book, TopUp(unit="U1", volume_l=20, by="AB", at=CLOCK - timedelta(hours=5)))
    unit = next(u for u in views.watch(book).units if u.unit == "U1")
    assert {"hot", "unfiltered-topup"} <= set(unit.flags)
    assert_cache_is_fresh(book)
    register.update(book, Unit, "U1", {"max_temp_c": 70.0})  # now the reading is not hot
    unit = next(u for u in views.watch(book).units if u.unit == "U1")
    assert "hot" not in unit.flags
    assert_cache_is_fresh(book)
