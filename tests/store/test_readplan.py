"""The next-reading time: the rule (store/forecast/readplan.py) and the status that carries it."""

import json
import math
from datetime import UTC, datetime, timedelta

import pytest
from scipy import stats

from store import record, views
from store.db.book import open_book
from store.derived.statuscache import stale_filters
from store.forecast import readplan
from store.health import status_json, watchlist
from store.ledger import register
from store.ledger.entries import ElementChange, Reading
from store.ledger.register import FilterPosition, Fluid, Technician, Unit
from tests.kit.books import exp_dp, pace_book


def test_a_share_of_the_warning_time_within_the_bounds(monkeypatch):
    # the shipped share: two thirds (chosen by the clogging benchmark's nested selection)
    assert readplan.READ_SHARE == pytest.approx(2 / 3)
    assert readplan.bounded_gap(120.0, 168.0, 8.0, "forecast") == readplan.ReadGap(
        pytest.approx(80.0), "forecast"
    )
    # Reliability-centred maintenance: check at half the warning time (P-F interval)
    # common practice, no source
    monkeypatch.setattr(readplan, "READ_SHARE", 0.5)
    assert readplan.bounded_gap(100.0, 168.0, 8.0, "forecast") == readplan.ReadGap(50.0, "forecast")
    assert readplan.bounded_gap(1000.0, 168.0, 8.0, "forecast") == readplan.ReadGap(
        168.0, "interval"
    )
    # half the warning is under a shift: no reading with time to spare fits before the date,
    # so the next visit is the date itself (the change); closer than a shift: a shift on
    assert readplan.bounded_gap(10.0, 168.0, 8.0, "forecast") == readplan.ReadGap(10.0, "change")
    assert readplan.bounded_gap(16.0, 168.0, 8.0, "forecast") == readplan.ReadGap(8.0, "forecast")
    assert readplan.bounded_gap(6.0, 168.0, 8.0, "forecast") == readplan.ReadGap(8.0, "shift")
    assert readplan.bounded_gap(-5.0, 168.0, 8.0, "forecast") == readplan.ReadGap(8.0, "shift")
    assert readplan.bounded_gap(None, 168.0, 8.0, "forecast") == readplan.ReadGap(168.0, "interval")
    # a registered interval shorter than a shift wins: never later than the interval
    assert readplan.bounded_gap(3.0, 4.0, 8.0, "forecast") == readplan.ReadGap(4.0, "shift")
    with pytest.raises(ValueError):
        readplan.bounded_gap(10.0, 0.0, 8.0, "forecast")


@pytest.mark.parametrize("shape, scale_h, age_h", [(2.5, 1000.0, 0.0), (2.5, 1000.0, 600.0),
                                                   (1.0, 500.0, 300.0), (4.0, 2000.0, 1900.0)])  # fmt: skip
def test_life_warning_is_the_conditional_five_percent_point(shape, scale_h, age_h):
    w = readplan.life_warning_h(shape, scale_h, age_h)
    # cross-check with scipy's Weibull: of the elements alive at age_h, 5 % trip by age_h + w
    sf = stats.weibull_min(shape, scale=scale_h).sf
    assert 1 - sf(age_h + w) / sf(age_h) == pytest.approx(0.05, rel=1e-9)
    # one gap is the shipped share of it: the chance of tripping before the next check
    # stays under 5 % (at the RCM half: before the check after next, two gaps, it is 5 %)
    gap = readplan.bounded_gap(w, 1e9, 0.0, "service-life").gap_h
    assert gap == pytest.approx(readplan.READ_SHARE * w, rel=1e-12)
    assert 1 - sf(age_h + gap) / sf(age_h) < 0.05
    assert 1 - sf(age_h + w) / sf(age_h) == pytest.approx(0.05, rel=1e-9)


def test_shortest_shift_of_a_pattern():
    # 3 x 8 h from 06:00, 2 x 12 h, an uneven pattern across midnight, one shift a day
    assert readplan.shortest_shift_h(["06:00", "14:00", "22:00"]) == 8.0
    assert readplan.shortest_shift_h(["19:00", "07:00"]) == 12.0
    assert readplan.shortest_shift_h(["22:00", "06:00", "18:00"]) == 4.0
    assert readplan.shortest_shift_h(["06:00"]) == 24.0
    assert readplan.shortest_shift_h([]) == 24.0


def _filter(watch, tag):
    return next(f for f in watch.filters if f.filter == tag)


def test_status_plans_the_next_reading_from_the_earliest_date(tmp_path):
    book = pace_book(tmp_path, 1000.0)  # an element like its six forerunners, at 60 % of life
    f = _filter(views.watch(book), "M2-RF")
    assert f.due is not None and f.next_rule == "forecast"
    gap_h = (f.next_reading - f.reading_at).total_seconds() / 3600
    # towards the earliest date as this reading gives it or as the one before gave it (the
    # audit as of that reading, from the entries), whichever is sooner
    before = _filter(views.watch(book, as_of=f.reading_at - timedelta(hours=24)), "M2-RF")
    assert before.reading_at == f.reading_at - timedelta(hours=24) and before.due is not None
    until = min(f.due.earliest, before.due.earliest)
    warning_h = (until - f.reading_at).total_seconds() / 3600
    assert gap_h == pytest.approx(readplan.READ_SHARE * warning_h, abs=1 / 60)
    assert 24.0 < gap_h < 17_520  # the floor (no shift pattern: a day) and the interval
    # the reading-overdue flag: once the planned gap is passed by half again, not before
    before = _filter(views.watch(book, as_of=f.reading_at + timedelta(hours=1.4 * gap_h)), "M2-RF")
    after = _filter(views.watch(book, as_of=f.reading_at + timedelta(hours=1.6 * gap_h)), "M2-RF")
    assert "reading-overdue" not in before.flags
    assert "reading-overdue" in after.flags
    # one documented key in the JSON
    data = status_json.to_json(views.watch(book))
    (row,) = data["filters"]
    assert row["next_reading"]["rule"] == "forecast"
    assert json.dumps(row["next_reading"])
    book.close()


def test_a_shift_pattern_sets_the_floor_and_refreshes_the_kept_rows(tmp_path):
    book = pace_book(tmp_path, 1000.0)
    last = _filter(views.watch(book), "M2-RF").reading_at
    # an element loading faster than every earlier one: its earliest date is close
    record_reading = Reading(filter="M2-RF", dp_bar=1.95, temp_c=50, by="AB",
                             at=last + timedelta(hours=2))  # fmt: skip
    record.log(book, record_reading)
    f = _filter(views.watch(book), "M2-RF")
    assert f.next_rule == "shift"  # 97.5 % of the limit: read next shift
    assert f.next_reading - f.reading_at == timedelta(hours=24)
    register.set_shifts(book, [("A", "06:00"), ("B", "14:00"), ("C", "22:00")], by="AB")
    assert len(stale_filters(book)) == 1  # the kept row waits for a refresh
    f = _filter(views.watch(book), "M2-RF")
    assert f.next_reading - f.reading_at == timedelta(hours=8)
    book.close()


def test_a_new_element_without_readings_is_planned_from_earlier_lives(tmp_path):
    book = pace_book(tmp_path, 1000.0)
    now = book.now()
    record.log(book, ElementChange(filter="M2-RF", reason="limit", by="AB", at=now))
    f = _filter(views.watch(book), "M2-RF")
    # no readings on the new element: the earlier lives plan it (service life), given age 0
    assert f.next_rule == "service-life"
    gap_h = (f.next_reading - now).total_seconds() / 3600
    assert 0 < gap_h < 1000 and math.isfinite(gap_h)
    book.close()


def test_an_indicator_only_filter_is_planned_from_its_service_life(tmp_path):
    t0 = datetime(2026, 1, 5, 6, 0, tzinfo=UTC)
    book = open_book(tmp_path / "ind.db")
    register.add(book, Technician(tag="AB"))
    register.add(book, Fluid(tag="HV46", iso_vg=46))
    register.add(book, Unit(tag="U1", fluid="HV46", normal_temp_c=50))
    register.add(book, FilterPosition(tag="U1-PF", unit="U1", kind="pressure", limit_bar=2.0,
                                      bypass_bar=3.0, gauge=False, reading_interval_h=2000))  # fmt: skip
    # six earlier elements that tripped their indicator after 500-700 h (our own history)
    t, entries = t0, []
    for life_h in (520, 610, 700, 560, 650, 590):
        entries.append(ElementChange(filter="U1-PF", reason="indicator", by="AB", at=t))
        entries.append(Reading(filter="U1-PF", indicator="clean", by="AB",
                               at=t + timedelta(hours=life_h / 2)))  # fmt: skip
        entries.append(Reading(filter="U1-PF", indicator="dirty", by="AB",
                               at=t + timedelta(hours=life_h - 1)))  # fmt: skip
        t += timedelta(hours=life_h)
    entries.append(ElementChange(filter="U1-PF", reason="indicator", by="AB", at=t))
    entries.append(Reading(filter="U1-PF", indicator="clean", by="AB", at=t + timedelta(hours=300)))
    record.log_many(book, entries)
    book.set_setting("clock", (t + timedelta(hours=301)).strftime("%Y-%m-%dT%H:%M:%SZ"))
    f = _filter(views.watch(book), "U1-PF")
    assert f.next_rule == "service-life"
    shape, scale_h = views.status_of(book, watchlist.plant(book).contexts[0]).clock.life
    gap_h = (f.next_reading - f.reading_at).total_seconds() / 3600
    # scipy's Weibull: the gap is the shipped share of the time, from age 300 h, to the point
    # where 5 % of the elements that lasted 300 h have tripped
    sf = stats.weibull_min(shape, scale=scale_h).sf
    span_h = gap_h / readplan.READ_SHARE
    assert 1 - sf(300 + span_h) / sf(300) == pytest.approx(0.05, abs=1e-4)
    assert gap_h < 300  # well inside the 2000 h interval: the element is past half its life
    book.close()


def test_the_pessimistic_date_moves_later_only_on_a_second_reading():
    a, b = datetime(2026, 5, 1, tzinfo=UTC), datetime(2026, 5, 9, tzinfo=UTC)
    assert readplan.pessimistic_date(b, a) == a  # one reading says later: keep the sooner
    assert readplan.pessimistic_date(a, b) == a  # one reading says sooner: take it at once
    assert readplan.pessimistic_date(b, None) == b  # nothing before: the newest reading's


def test_one_low_reading_does_not_relax_the_plan(tmp_path):
    # an element loading faster than its forerunners (600 h against ~1000 h), read daily to
    # 60 % of its life; then one reading that looks like a slow element's (our own model)
    book = pace_book(tmp_path, 600.0)
    first = _filter(views.watch(book), "M2-RF")
    at = first.reading_at + timedelta(hours=24)
    record.log(book, Reading(filter="M2-RF", dp_bar=round(exp_dp(384, 1000.0), 3), temp_c=50,
                             by="AB", at=at))  # fmt: skip
    book.set_setting("clock", (at + timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M:%SZ"))
    f = _filter(views.watch(book), "M2-RF")
    # the low reading put the earliest date later than the reading before had it ...
    assert f.due.earliest > first.due.earliest
    # ... but the next reading is still planned towards the sooner date (as of the day before)
    gap_h = (f.next_reading - at).total_seconds() / 3600
    warning_h = (first.due.earliest - at).total_seconds() / 3600
    assert gap_h == pytest.approx(max(readplan.READ_SHARE * warning_h, 24.0), abs=1 / 60)
    assert f.next_reading < at + (f.due.earliest - at) * readplan.READ_SHARE
    # the kept row and the audit from the entries agree on it
    audit = _filter(views.watch(book, as_of=at + timedelta(hours=1)), "M2-RF")
    assert audit.next_reading == f.next_reading
    book.close()


# 1 psi = 0.068 947 572 93 bar (REFERENCES.md §5, from the exact definitions)
PSI = 0.06894757293168361


def test_one_gauge_step_under_the_limit_the_next_visit_is_the_change():
    step = 0.5 * PSI  # a gauge read to 0.5 psi, a 20 psi limit (the clogging data's rule)
    limit = 20 * PSI
    assert readplan.at_last_step(19.5 * PSI, limit, step)
    assert not readplan.at_last_step(19.0 * PSI, limit, step)  # the gauge can show 19.5 first
    assert not readplan.at_last_step(20.0 * PSI, limit, step)  # at the limit: not under it
    assert not readplan.at_last_step(19.5 * PSI, limit, 0.0)  # no step known
    # the step between the gauge's values reaches the limit: a 0.1 bar gauge at 1.6 of 1.7 bar
    assert readplan.at_last_step(1.6, 1.7, 0.1)
    # the visit is the date itself (the change), with no share and no shift floor ...
    assert readplan.bounded_gap(30.0, 720.0, 8.0, "forecast", True) == readplan.ReadGap(
        30.0, "change"
    )
    assert readplan.bounded_gap(5.0, 720.0, 8.0, "forecast", True) == readplan.ReadGap(
        5.0, "change"
    )
    # ... never later than the registered interval; a date that has come: a shift on
    assert readplan.bounded_gap(900.0, 720.0, 8.0, "forecast", True) == readplan.ReadGap(
        720.0, "interval"
    )
    assert readplan.bounded_gap(0.0, 720.0, 8.0, "forecast", True) == readplan.ReadGap(8.0, "shift")
    assert readplan.bounded_gap(None, 720.0, 8.0, "forecast", True) == readplan.ReadGap(
        720.0, "interval"
    )


def _gauge_book(tmp_path, last_psi: float):
    """Six earlier elements of 950-1050 h and the current one (1000 h), all read daily on a
    0.5 psi gauge (20 psi limit) at the unit's normal temperature, the current one until the
    gauge shows last_psi (our own model: an exponential rise)."""
    book = open_book(tmp_path / "gauge.db")
    register.add(book, Technician(tag="AB"))
    register.add(book, Fluid(tag="HV46", iso_vg=46))
    register.add(book, Unit(tag="G1", fluid="HV46", normal_temp_c=50))
    register.add(book, FilterPosition(tag="G1-RF", unit="G1", kind="return", limit_bar=20 * PSI,
                                      bypass_bar=40 * PSI, clean_bar=3 * PSI,
                                      reading_interval_h=720))  # fmt: skip

    def gauge(h: float, life_h: float) -> float:
        k = math.log1p(17 / 0.5) / life_h
        return round((3 + 0.5 * math.expm1(k * h)) / 0.5) * 0.5

    t0 = datetime(2026, 1, 5, 6, 0, tzinfo=UTC)
    t, entries = t0, []
    for life in (950.0, 1000.0, 1050.0, 980.0, 1020.0, 1000.0):
        entries.append(ElementChange(filter="G1-RF", reason="limit", by="AB", at=t))
        entries += [Reading(filter="G1-RF", dp_bar=gauge(h, life) * PSI, temp_c=50, by="AB",
                            at=t + timedelta(hours=h)) for h in range(24, int(life), 24)]  # fmt: skip
        t += timedelta(hours=life)
    entries.append(ElementChange(filter="G1-RF", reason="limit", by="AB", at=t))
    hours = [h for h in range(24, 1000, 24) if gauge(h, 1000.0) < last_psi]
    hours.append(next(h for h in range(hours[-1], 1000) if gauge(h, 1000.0) == last_psi))
    entries += [Reading(filter="G1-RF", dp_bar=gauge(h, 1000.0) * PSI, temp_c=50, by="AB",
                        at=t + timedelta(hours=h)) for h in hours]  # fmt: skip
    record.log_many(book, entries)
    book.set_setting("clock", (entries[-1].at + timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M:%SZ"))
    return book, entries[-1].at


@pytest.mark.parametrize("last_psi", [19.0, 19.5])
def test_a_gauge_at_its_last_step_is_changed_at_the_earliest_date(tmp_path, last_psi):
    book, at = _gauge_book(tmp_path, last_psi)
    f = _filter(views.watch(book), "G1-RF")
    assert f.reading_at == at and f.dp_bar == pytest.approx(last_psi * PSI)
    assert f.due is not None and f.state == "ok"
    if last_psi == 19.5:
        # one step under the limit: the change, at the earliest date as this reading gives it
        assert f.next_rule == "change"
        assert f.next_reading == f.due.earliest
    else:
        # the gauge can still show 19.5 first: a reading as before (here the earliest date has
        # passed, so a shift on: a day without a shift pattern), not the change
        assert f.next_rule in ("forecast", "shift")
        assert f.next_reading != f.due.earliest
    book.close()
