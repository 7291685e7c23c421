"""The watch list end to end: entries in the book -> normalised ΔP, due dates, flags, audit."""

from datetime import UTC, datetime, timedelta

import pytest

from store import record, views
from store.base.units import to_bar
from store.db.book import open_book
from store.derived.statuscache import rebuild, stale_filters
from store.health import status, status_json, units
from store.ledger import register
from store.ledger.entries import BreatherSwap, ElementChange, Reading, Sample, TopUp, Void
from store.ledger.register import FilterPosition, Fluid, Technician, Unit
from tests.benchmarks.clogging import data_dir, load_runs, technician_log
from tests.kit.books import meter_book, pace_book

T0 = datetime(2026, 3, 2, 6, 0, tzinfo=UTC)


def one(watch, tag):
    return next(f for f in watch.filters if f.filter == tag)


@pytest.fixture
def d341_book(tmp_path):
    """A unit whose oil is the ASTM D341 worked-example fluid (32 cSt at 40 °C, 5.4 at 100 °C)."""
    with open_book(tmp_path / "d341.db") as book:
        register.add(book, Technician(tag="AB"))
        register.add(book, Fluid(tag="EX32", nu40_cst=32.0, nu100_cst=5.4))
        register.add(
            book, Unit(tag="U1", fluid="EX32", normal_temp_c=80, max_temp_c=90, coldest_start_c=0)
        )
        register.add(
            book,
            FilterPosition(
                tag="U1-RF", unit="U1", kind="return", bypass_bar=3.5, limit_bar=2.5, clean_bar=0.3
            ),
        )
        book.set_setting("clock", "2026-03-10T12:00:00Z")
        yield book


def test_normalised_dp_uses_the_d341_viscosity_ratio(d341_book):
    book = d341_book
    record.log(book, ElementChange(filter="U1-RF", by="AB", at=T0))
    record.log(
        book, Reading(filter="U1-RF", dp_bar=1.0, temp_c=60, by="AB", at=T0 + timedelta(days=1))
    )
    f = one(views.watch(book), "U1-RF")
    # ASTM D341 worked example (REFERENCES.md §2, T = t + 273.15): ν(80 °C) = 8.5332,
    # ν(60 °C) = 15.186 mm²/s; the element ΔP scales with viscosity (REFERENCES.md §7b)
    assert f.dp_ref_bar == pytest.approx(1.0 * 8.5332 / 15.186, rel=1e-3)
    assert f.dp_bar == 1.0
    assert "8.5 mm²/s (80 °C)" in f.reference


def test_cold_start_bypass_is_flagged_with_its_temperature(d341_book):
    book = d341_book
    record.log(book, ElementChange(filter="U1-RF", by="AB", at=T0))
    record.log(
        book, Reading(filter="U1-RF", dp_bar=0.8, temp_c=80, by="AB", at=T0 + timedelta(days=1))
    )
    f = one(views.watch(book), "U1-RF")
    # 0.8 bar at 8.53 cSt reaches the 3.5 bar bypass where ν = 8.5332 × 3.5 / 0.8 = 37.3 cSt,
    # which the D341 line of this oil puts near 37 °C; a 0 °C start is far colder
    assert "cold-start-bypass" in f.flags
    assert f.cold.bypasses
    assert 30 < f.cold.bypass_below_c < 40
    assert book.conn.execute("SELECT 1").fetchone()  # nothing was written by reading status


def test_drop_without_change_is_urgent(book):
    # common practice, no source: ΔP that falls with no element change means a torn or
    # missing element or an open bypass; this sequence rises steadily then falls by half
    t = book.now() - timedelta(days=20)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    for i, dp in enumerate([0.60, 0.65, 0.70, 0.75, 0.80, 0.85, 0.90, 0.95, 0.45, 0.40]):
        record.log(
            book,
            Reading(
                filter="P1-RF", dp_bar=dp, temp_c=50, by="AB", at=t + timedelta(days=1 + 2 * i)
            ),
        )
    w = views.watch(book)
    f = one(w, "P1-RF")
    assert "dp-drop" in f.flags
    assert w.filters[0].filter == "P1-RF"  # urgent first


def test_voided_reading_is_ignored_and_as_of_sees_the_past(book):
    t = book.now() - timedelta(days=10)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    good = [
        record.log(
            book,
            Reading(
                filter="P1-RF",
                dp_bar=0.5 + 0.05 * i,
                temp_c=50,
                by="AB",
                at=t + timedelta(days=i + 1),
            ),
        )
        for i in range(4)
    ]
    wrong = record.log(
        book, Reading(filter="P1-RF", dp_bar=3.4, temp_c=50, by="AB", at=t + timedelta(days=6))
    )
    before_void = book.now()
    assert one(views.watch(book), "P1-RF").dp_ref_bar == pytest.approx(3.4)
    record.log(
        book,
        Void(
            voids=wrong.id,
            note="read the wrong gauge",
            by="AB",
            at=before_void + timedelta(minutes=1),
        ),
    )
    book.set_setting("clock", (before_void + timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M:%SZ"))
    now = one(views.watch(book), "P1-RF")
    assert now.dp_ref_bar == pytest.approx(good[-1].dp_bar)
    assert now.readings_since_change == 4
    # audit: as the book stood before the void, the wrong reading still counted
    then = one(views.watch(book, as_of=before_void), "P1-RF")
    assert then.dp_ref_bar == pytest.approx(3.4)
    assert then.readings_since_change == 5
    # and before the third reading, only two readings existed
    early = one(views.watch(book, as_of=good[1].at), "P1-RF")
    assert early.readings_since_change == 2


def test_cache_agrees_with_a_fresh_computation(book):
    book.set_setting("clock", "2026-06-01T12:00:00Z")
    t = book.now() - timedelta(days=30)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    for i in range(12):
        record.log(
            book,
            Reading(
                filter="P1-RF",
                dp_bar=0.5 + 0.04 * i + 0.004 * i * i,
                temp_c=45 + i % 3,
                by="AB",
                at=t + timedelta(days=2 * i + 1),
            ),
        )
    cached = one(views.watch(book), "P1-RF")
    fresh = one(views.watch(book, as_of=book.now()), "P1-RF")
    for name in (
        "dp_ref_bar",
        "percent_of_limit",
        "due",
        "bypass_due",
        "basis",
        "state",
        "flags",
        "readings_since_change",
    ):
        assert getattr(cached, name) == getattr(fresh, name), name
    assert rebuild(book) == 2


def test_fluid_care_flags(book):
    now = book.now()
    record.log(book, TopUp(unit="P1", volume_l=10, by="AB", at=now - timedelta(days=2)))
    # ISO 4406 table (REFERENCES.md §1c): 30000/5000/60 per mL is 22/19/13, over 17/15/12
    record.log(
        book,
        Sample(
            unit="P1",
            c4_per_ml=30000,
            c6_per_ml=5000,
            c14_per_ml=60,
            by="AB",
            at=now - timedelta(days=1),
        ),
    )
    record.log(
        book,
        BreatherSwap(breather="P1-BR", condition="spent", by="AB", at=now - timedelta(days=200)),
    )
    w = views.watch(book)
    unit = w.units[0]
    assert "unfiltered-topup" in unit.flags
    assert unit.latest_code == "22/19/13" and "over-target" in unit.flags
    assert {"swap-overdue", "desiccant-spent"} <= set(w.breathers[0].flags)


def test_rising_top_ups_point_to_a_leak(book):
    now = book.now()
    # a steady 2 L a week for five months, then 12 L a week for four weeks
    # (invented consumption; the rule is the unit against its own history, DOMAIN.md §5)
    for week in range(24, 4, -1):
        record.log(
            book,
            TopUp(unit="P1", volume_l=2, filtered_um=3, by="AB", at=now - timedelta(weeks=week)),
        )
    for day in (26, 19, 12, 5):
        record.log(
            book,
            TopUp(unit="P1", volume_l=12, filtered_um=3, by="AB", at=now - timedelta(days=day)),
        )
    unit = views.watch(book).units[0]
    assert "leak-suspect" in unit.flags
    assert unit.consumption.recent_l_per_week == pytest.approx(12.0)


def test_a_filter_without_limits_says_so(book):
    register.add(book, FilterPosition(tag="P1-SS", unit="P1", kind="suction-strainer"))
    record.log(book, Reading(filter="P1-SS", dp_bar=0.05, by="AB"))
    f = one(views.watch(book), "P1-SS")
    assert f.state == "no-limits" and f.due is None and "no-limits" in f.flags


def test_indicator_only_filter_plans_from_earlier_lives(book):
    # element lives of 30, 34, 38, 42 days to "dirty" (invented history for the bookkeeping)
    t = book.now() - timedelta(days=170)
    record.log(book, ElementChange(filter="P1-PF", reason="indicator", by="AB", at=t))
    for days in (30, 34, 38, 42):
        t += timedelta(days=days)
        record.log(
            book, Reading(filter="P1-PF", indicator="dirty", by="AB", at=t - timedelta(hours=2))
        )
        record.log(book, ElementChange(filter="P1-PF", reason="indicator", by="AB", at=t))
    f = one(views.watch(book), "P1-PF")
    assert f.basis == "service-life"
    assert f.life is not None and f.life.n_failed == 4
    assert f.due is not None and f.due.earliest <= f.due.likely


@pytest.mark.parametrize("current", ["04", "36"])
def test_due_interval_holds_the_true_crossing_of_a_real_run(tmp_path, current):
    """Real run-to-failure clogging runs (PHME 2020 data challenge, ../shared/data, SOURCE.md),
    logged through the book as a technician would, the earlier runs as earlier elements."""
    folder = data_dir()
    if not (folder / "runs.csv").is_file():
        pytest.skip(f"clogging data not found at {folder}")
    history = ("01", "02", "03") if current == "04" else ("33", "34", "35")
    runs = {r.name: r for r in load_runs(folder, names=(*history, current))}
    limit = to_bar(20, "psi")  # the data challenge's clogging rule (SOURCE.md)
    with open_book(tmp_path / "rig.db") as book:
        register.add(book, Technician(tag="AB"))
        register.add(book, Fluid(tag="RIG", iso_vg=32))
        register.add(book, Unit(tag="RIG", fluid="RIG"))
        register.add(
            book,
            FilterPosition(
                tag="RIG-F",
                unit="RIG",
                kind="return",
                limit_bar=limit,
                bypass_bar=to_bar(25, "psi"),
                reading_interval_h=1000,
            ),
        )
        t = T0
        for name in history:  # 1 s of rig time = 1 h of service
            record.log(book, ElementChange(filter="RIG-F", by="AB", at=t))
            ages, dps = technician_log(runs[name], seed=1)
            record.log_many(
                book,
                [
                    Reading(
                        filter="RIG-F", dp_bar=float(d), by="AB", at=t + timedelta(hours=float(a))
                    )
                    for a, d in zip(ages, dps, strict=True)
                ],
            )
            t += timedelta(hours=runs[name].life_h)
        record.log(book, ElementChange(filter="RIG-F", by="AB", at=t))
        run = runs[current]
        ages, dps = technician_log(run, seed=1)
        now_h = 0.7 * run.life_h
        record.log_many(
            book,
            [
                Reading(filter="RIG-F", dp_bar=float(d), by="AB", at=t + timedelta(hours=float(a)))
                for a, d in zip(ages, dps, strict=True)
                if a <= now_h
            ],
        )
        as_of = t + timedelta(hours=now_h)
        f = one(views.watch(book, as_of=as_of), "RIG-F")
        true_crossing = t + timedelta(hours=run.life_h)
        assert f.due is not None, f.notes
        assert f.due.earliest <= true_crossing, "the earliest date came after the crossing"
        remaining = true_crossing - as_of
        assert abs(f.due.likely - true_crossing) < 0.5 * remaining


def test_an_hour_meter_read_out_of_turn_does_not_stop_a_save(tmp_path):
    # an hour-meter unit; a reading logged late carries a meter value below the last one
    with open_book(tmp_path / "hm.db") as book:
        register.add(book, Technician(tag="AB"))
        register.add(book, Fluid(tag="HV46", iso_vg=46))
        register.add(book, Unit(tag="M1", fluid="HV46", hour_meter=True))
        register.add(
            book,
            FilterPosition(
                tag="M1-R", unit="M1", kind="return", bypass_bar=3.5, limit_bar=2.5, clean_bar=0.3
            ),
        )
        book.set_setting("clock", "2026-03-20T12:00:00Z")
        record.log(book, ElementChange(filter="M1-R", hours=1000, by="AB", at=T0))
        for day, hours, dp in ((1, 1020, 0.5), (2, 1040, 0.6), (4, 1080, 0.7), (5, 1100, 0.8)):
            record.log(
                book,
                Reading(
                    filter="M1-R",
                    dp_bar=dp,
                    temp_c=50,
                    hours=hours,
                    by="AB",
                    at=T0 + timedelta(days=day),
                ),
            )
        late = record.log(
            book,
            Reading(
                filter="M1-R",
                dp_bar=0.65,
                temp_c=50,
                hours=1060,
                by="AB",
                at=T0 + timedelta(days=6),
            ),
        )
        f = one(views.watch(book), "M1-R")
        assert f.readings_since_change == 5 and late.id


def test_a_register_change_reaches_the_cached_watch_list(book):
    t = book.now() - timedelta(days=10)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    record.log(
        book, Reading(filter="P1-RF", dp_bar=2.0, temp_c=50, by="AB", at=t + timedelta(days=1))
    )
    # 2.0 bar against the 2.5 bar limit; the unit's fluid at its normal temperature
    assert one(views.watch(book), "P1-RF").percent_of_limit == pytest.approx(80.0)
    register.update(book, FilterPosition, "P1-RF", {"limit_bar": 2.0}, by="AB")
    assert "over-limit" in one(views.watch(book), "P1-RF").flags
    # a colder normal temperature (thicker reference oil) makes the reading larger at reference
    before = one(views.watch(book), "P1-RF").dp_ref_bar
    register.update(book, Unit, "P1", {"normal_temp_c": 40.0}, by="AB")
    assert one(views.watch(book), "P1-RF").dp_ref_bar > before


def test_the_list_read_now_names_the_rows_a_refresh_would_recompute(book):
    """What the list read now had to compute is what `stale_filters` finds on its own pass
    over the kept rows (read in full, not by their columns): the screen counts it from the
    list instead of reading every kept row again."""

    def agree() -> list[str]:
        w = views.watch(book)
        found = sorted(t.upper() for t in w.recomputed)
        assert found == sorted(t.upper() for t in stale_filters(book))
        return found

    t = book.now() - timedelta(days=10)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    record.log(
        book, Reading(filter="P1-RF", dp_bar=2.0, temp_c=50, by="AB", at=t + timedelta(days=1))
    )
    agree()
    record.refresh_stale(book)
    assert agree() == []
    register.update(book, Unit, "P1", {"normal_temp_c": 40.0}, by="AB")
    p1 = sorted(p.tag.upper() for p in register.list_all(book, FilterPosition, "P1"))
    assert agree() == p1 and p1  # the unit's positions read its temperature
    one_unit = views.watch(book, unit="P1")
    assert sorted(t.upper() for t in one_unit.recomputed) == p1
    assert views.watch(book, as_of=book.now()).recomputed == ()  # an audit keeps nothing
    record.refresh_stale(book)
    assert agree() == []


# ---- an element loading faster than the earlier ones (fast-loading) -----------------------------


def test_an_element_loading_much_faster_than_the_last_six_is_flagged(tmp_path):
    # 650 h against earlier lives of 950-1050 h: about 1.5x their pace, far beyond their spread
    # (standard deviation of log lives 0.035: the threshold is the 1.2 floor, common practice)
    with pace_book(tmp_path, 650.0) as book:
        f = one(views.watch(book), "M2-RF")
        assert "fast-loading" in f.flags, f.notes
        note = next(n for n in f.notes if "pace" in n)
        assert "the pace of the last 6 elements" in note
        assert "fluid sample" in note and "breather" in note and "top-ups" in note
        assert 1.3 <= f.pace <= 1.7  # 1000 / 650 = 1.54
        data = status_json.to_json(views.watch(book))["filters"][0]
        assert "fast-loading" in data["flags"] and data["pace_vs_earlier"] == round(f.pace, 2)
        assert f"about {f.pace:.1f}×" in note


def test_an_element_at_the_usual_pace_is_not_flagged(tmp_path):
    with pace_book(tmp_path, 1000.0) as book:
        f = one(views.watch(book), "M2-RF")
        assert "fast-loading" not in f.flags
        assert f.pace is not None and 0.85 <= f.pace <= 1.15


# ---- hour meter: a reading without it ------------------------------------------------------------


def test_the_meter_is_estimated_between_and_after_logged_values(tmp_path):
    from store.health.elements import meter_at
    from store.sheets import meter_estimate_h

    pairs = [(T0, 1000.0), (T0 + timedelta(days=2), 1024.0)]
    # 12 h a day: half-way between the two values, and one day after the last
    assert meter_at(pairs, T0 + timedelta(days=1)) == pytest.approx(1012.0)
    assert meter_at(pairs, T0 + timedelta(days=3)) == pytest.approx(1036.0)
    assert meter_at(pairs, T0 + timedelta(days=3), rate_h_per_day=20.0) == pytest.approx(1044.0)
    assert meter_at(pairs[:1], T0 + timedelta(days=3)) is None  # no rate to go on
    with meter_book(tmp_path) as book:
        # last value 1480 h on day 40; a day later at 12 h a day
        assert meter_estimate_h(book, "M1", book.now()) == pytest.approx(1492.0)
        f = one(views.watch(book), "M1-R")
        assert f.element_age_h == pytest.approx(492.0)


def test_a_reading_without_the_meter_does_not_move_the_due_date(tmp_path):
    with meter_book(tmp_path) as book:
        at = T0 + timedelta(days=41)
        before = one(views.watch(book), "M1-R")
        record.log(book, Reading(filter="M1-R", dp_bar=0.3 + 0.002 * 492, temp_c=50, by="AB",
                                  at=at))  # fmt: skip
        without = one(views.watch(book), "M1-R")
    with meter_book(tmp_path / "b" if (tmp_path / "b").mkdir() is None else tmp_path) as book:
        record.log(book, Reading(filter="M1-R", dp_bar=0.3 + 0.002 * 492, temp_c=50, by="AB",
                                  at=at, hours=1492))  # fmt: skip
        with_meter = one(views.watch(book), "M1-R")
    # the same reading, on the line of the others: with the meter or with its estimate, the
    # same due date (to the minute); read in calendar hours it would come about twice as late
    assert abs(without.due.likely - with_meter.due.likely) < timedelta(minutes=1)
    assert abs(without.due.likely - before.due.likely) < timedelta(days=2)
    assert without.element_age_h == pytest.approx(with_meter.element_age_h)


def test_a_new_element_without_meter_readings_ages_at_the_units_running_rate(tmp_path):
    # the element in service has only its fitting's meter value; its readings without the meter
    # are aged at the 12 h a day the earlier element's meter values show
    with meter_book(tmp_path) as book:
        fitted = T0 + timedelta(days=41)
        book.set_setting("clock", (fitted + timedelta(days=5)).strftime("%Y-%m-%dT%H:%M:%SZ"))
        record.log(book, ElementChange(filter="M1-R", hours=1492, by="AB", at=fitted))
        record.log_many(
            book,
            [
                Reading(filter="M1-R", dp_bar=0.3 + 0.01 * day, temp_c=50, by="AB",
                        at=fitted + timedelta(days=day))
                for day in (1, 2, 3, 4)
            ],
        )  # fmt: skip
        from store.derived.statuscache import filter_view

        f, _ = filter_view(book, "M1-R")
        assert [p.age_h for p in f.history] == pytest.approx([12.0, 24.0, 36.0, 48.0])
        assert f.element_age_h == pytest.approx(60.0)


NOTE_OF_BASIS = {  # README "Basis": the words of the note for each basis
    "earlier-curves": "matched to the loading curves of",
    "trend": "fitted to",
    "service-life": "earlier",
}


def test_basis_names_what_the_note_says(tmp_path):
    # issue 11: the note said "matched to the loading curves of 23 earlier elements" while the
    # basis said "trend"
    from store.derived.statuscache import filter_view

    with pace_book(tmp_path, 1000.0) as book:
        f, _ = filter_view(book, "M2-RF")
        assert f.basis == f.forecast.basis
        assert NOTE_OF_BASIS[f.basis] in " ".join(f.notes)
        data = status_json.to_json(views.watch(book))["filters"][0]
        assert data["basis"] == f.basis
        # a new element without readings: planned from the earlier lives
        record.log(book, ElementChange(filter="M2-RF", by="AB", at=book.now()))
        g = one(views.watch(book), "M2-RF")
        assert g.basis == "service-life" and NOTE_OF_BASIS["service-life"] in " ".join(g.notes)


def test_a_halved_reading_on_the_demo_is_a_drop_even_after_one_in_the_same_minute(
    demo_file, tmp_path
):
    # Issue 23: 2.50 then 1.25 bar on D2-R in one minute, no change between: the watch list
    # showed no flag (same-age readings were ordered by value, so 2.50 looked the newest).
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    with open_book(path, create=False) as book:
        now = book.now()
        for dp in (2.5, 1.25):
            record.log(book, Reading(filter="D2-R", dp_bar=dp, temp_c=50, by="AK", at=now))
        f = one(views.watch(book), "D2-R")
        assert "dp-drop" in f.flags, f.notes
        assert f.dp_ref_bar == pytest.approx(1.25)
        # the kept row and a whole recomputation agree
        rebuild(book)
        assert "dp-drop" in one(views.watch(book), "D2-R").flags


def test_water_over_the_limit_is_flagged_on_the_demo(demo_file, tmp_path):
    # Issue 24: PR-3's latest sample says 420 ppm and no flag said so. 300 ppm: about what
    # mineral hydraulic oil keeps dissolved warm # from memory
    path = tmp_path / "demo.db"
    path.write_bytes(demo_file.read_bytes())
    with open_book(path, create=False) as book:
        pr3 = next(u for u in views.watch(book).units if u.unit == "PR-3")
        assert "water-high" in pr3.flags and any("420 ppm water" in n for n in pr3.notes)
        record.log(
            book, Sample(unit="PR-3", code="18/16/13", water_ppm=150, by="AK", at=book.now())
        )
        pr3 = next(u for u in views.watch(book).units if u.unit == "PR-3")
        assert "water-high" not in pr3.flags  # the newest sample rules
        assert units.water_flag(300.0) is None and units.water_flag(301.0) is not None


def test_a_new_element_already_high_is_flagged(book):
    # Issue 24: a new element at 77 % of its limit after 23 h got no word. P1-RF's change
    # limit is 2.5 bar (tests/kit/plant.py); readings at its 50 °C reference condition.
    t = book.now() - timedelta(hours=30)
    record.log(book, ElementChange(filter="P1-RF", by="AB", at=t))
    record.log(
        book,
        Reading(filter="P1-RF", dp_bar=0.77 * 2.5, temp_c=50, by="AB", at=t + timedelta(hours=23)),
    )
    f = one(views.watch(book), "P1-RF")
    assert "new-element-high" in f.flags
    assert any("77 % of its change limit after 23 h" in n for n in f.notes)
    assert status.new_element_high(77.0, 100.0) is None  # an older element: its due date says
    assert status.new_element_high(40.0, 10.0) is None  # a new one still low
