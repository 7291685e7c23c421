"""Forecast of the change limit and bypass (store/forecast/trend.py and its helpers).

The loading curves here are our own synthetic data, each from a stated generating model with
seeded noise; the true crossing age follows from that model (checked with scipy's brentq).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from store.base.errors import BookError
from store.forecast.life import fit_weibull
from store.forecast.trend import (
    EARLIEST_P,
    LATEST_P,
    ElementReadings,
    PastElement,
    forecast,
    prepare_readings,
)
from store.forecast.trend_history import make_template

LIMIT = 2.0  # bar; a return-filter change limit (REFERENCES.md §7a: bypass 1.7-3.5 bar, memory)
BYPASS = 2.5


def exp_curve(t, life_h=1000.0, clean=0.3, a=0.05):
    """Exponential growth of the excess over clean, scaled to reach LIMIT at life_h."""
    k = math.log1p((LIMIT - clean) / a) / life_h
    return clean + a * np.expm1(k * np.asarray(t, dtype=float))


def cubic_curve(t, life_h=1000.0, clean=0.2):
    """Third-order rise to LIMIT at life_h (REFERENCES.md §7a: ΔP vs life roughly 3rd order)."""
    return clean + (LIMIT - clean) * (np.asarray(t, dtype=float) / life_h) ** 3


def line_curve(t, life_h=1000.0, clean=0.4):
    return clean + (LIMIT - clean) * np.asarray(t, dtype=float) / life_h


def blocking_curve(t, tb=1200.0, clean=0.3):
    """Complete pore blocking at constant flow: dp = clean / (1 - t / tb) (Hermia, from memory)."""
    return clean / (1.0 - np.asarray(t, dtype=float) / tb)


def readings(curve, t_max, n=20, noise=0.01, seed=0, **kw):
    t = np.linspace(t_max / n, t_max, n)
    y = curve(t, **kw) + np.random.default_rng(seed).normal(0.0, noise, n)
    return t, y


def run(t, y, clean=None, limit=LIMIT, bypass=None, now=None, earlier=()):
    now = float(t[-1]) if now is None and len(t) else (now or 0.0)
    return forecast(ElementReadings(tuple(t), tuple(y)), clean, limit, bypass, now, earlier)


def true_crossing(curve, level=LIMIT, **kw):
    hi = 0.9999 * kw.get("tb", 1200.0) if curve is blocking_curve else 5000.0
    return brentq(lambda s: float(curve(s, **kw)) - level, 0.0, hi)


CURVES = [(exp_curve, 0.3), (cubic_curve, 0.2), (line_curve, 0.4), (blocking_curve, 0.3)]


def read_to(curve, clean, share=0.4):
    """Age at which ΔP has covered `share` of the way from clean to the limit."""
    return true_crossing(curve, level=clean + share * (LIMIT - clean))


@pytest.mark.parametrize(("curve", "clean"), CURVES)
def test_recovers_crossing_of_known_curves(curve, clean):
    # Read until ΔP is 40 % of the way to the limit (about 0.4-0.8 of the life for these shapes).
    t, y = readings(curve, read_to(curve, clean))
    fc = run(t, y, clean=clean)
    truth = true_crossing(curve)
    assert fc.state == "ok"
    assert fc.basis == "trend"
    assert fc.to_limit.likely_h == pytest.approx(truth, rel=0.06)
    assert fc.to_limit.earliest_h > t[-1]


@pytest.mark.parametrize(("curve", "clean"), CURVES[:2])
def test_interval_covers_the_crossing(curve, clean):
    # 20 noisy logs (noise 0.03 bar): the 5-95 % interval should hold the truth about 90 % of
    # the time; demand 15 of 20.
    truth = true_crossing(curve)
    t_max = read_to(curve, clean)
    hits = 0
    for seed in range(20):
        t, y = readings(curve, t_max, noise=0.03, seed=seed)
        iv = run(t, y, clean=clean).to_limit
        hits += iv.earliest_h <= truth <= iv.latest_h
    assert hits >= 15


def test_bypass_after_limit():
    t, y = readings(cubic_curve, 700.0)
    fc = run(t, y, clean=0.2, bypass=BYPASS)
    # Beyond the limit the cubic goes on: it reaches the bypass at (2.3 / 1.8) ** (1/3) * 1000 h.
    truth = true_crossing(cubic_curve, level=BYPASS)
    assert fc.to_bypass.likely_h > fc.to_limit.likely_h
    assert fc.to_bypass.likely_h == pytest.approx(truth, rel=0.08)


def test_half_the_limit_is_late_in_life():
    # REFERENCES.md §7a (HAWE): at half the permitted ΔP an element is ~80 % through its life.
    # On the 3rd-order curve that point is (0.5) ** (1/3) = 0.794 of life; read up to it, the
    # forecast must leave about a fifth of the life, not the half a straight line would.
    t_half = true_crossing(cubic_curve, level=0.2 + 0.5 * (LIMIT - 0.2))
    assert t_half / 1000.0 == pytest.approx(0.8, abs=0.01)
    t, y = readings(cubic_curve, t_half, n=25)
    fc = run(t, y, clean=0.2)
    remaining = fc.to_limit.likely_h - t_half
    assert remaining == pytest.approx(1000.0 - t_half, rel=0.15)


@pytest.mark.parametrize(("curve", "clean"), CURVES)
def test_one_wild_reading_barely_moves_the_date(curve, clean):
    t, y = readings(curve, read_to(curve, clean))
    base = run(t, y, clean=clean).to_limit.likely_h
    for i in (5, 10, 15):
        wild = y.copy()
        wild[i] *= 3.0  # a misread gauge, or a cold-oil reading left uncorrected
        moved = run(t, wild, clean=clean).to_limit.likely_h
        assert moved == pytest.approx(base, rel=0.03)


def test_unsorted_input_gives_the_same_forecast():
    t, y = readings(exp_curve, 750.0)
    order = np.random.default_rng(3).permutation(t.size)
    a = run(t, y, clean=0.3)
    b = forecast(ElementReadings(tuple(t[order]), tuple(y[order])), 0.3, LIMIT, None, t[-1])
    assert a == b


def test_duplicate_ages_are_averaged():
    ages, dp, counts = prepare_readings([30.0, 10.0, 30.0, 20.0], [0.5, 0.3, 0.7, 0.4])
    assert ages.tolist() == [10.0, 20.0, 30.0]
    assert dp.tolist() == pytest.approx([0.3, 0.4, 0.6])
    assert counts.tolist() == [1.0, 1.0, 2.0]
    # A forecast with a reading entered twice stays close to the one with a single entry.
    t, y = readings(exp_curve, 750.0)
    once = run(t, y, clean=0.3).to_limit.likely_h
    twice = run(np.r_[t[5], t], np.r_[y[5], y], clean=0.3).to_limit.likely_h
    assert twice == pytest.approx(once, rel=0.02)


def test_too_few_readings():
    fc = run([10.0, 20.0], [0.3, 0.31], clean=0.3)
    assert (fc.state, fc.basis, fc.to_limit) == ("too-few-readings", "none", None)
    assert run([], [], now=50.0).state == "no-readings"


def lives_only(lives, censored=()):
    return [PastElement((), (), h, True) for h in lives] + [
        PastElement((), (), h, False) for h in censored
    ]


def test_too_few_readings_falls_back_on_earlier_lives():
    lives, censored = [900.0, 950.0, 1000.0, 1050.0, 1100.0], [400.0]
    fc = run([50.0, 100.0], [0.3, 0.31], clean=0.3, earlier=lives_only(lives, censored))
    assert (fc.state, fc.basis) == ("too-few-readings", "service-life")
    # Conditional on having lasted to the last reading (100 h), from the censored Weibull.
    weib = fit_weibull(lives, censored)
    assert fc.to_limit.likely_h == pytest.approx(100.0 + weib.remaining_quantile_h(100.0, 0.5))
    assert fc.to_limit.earliest_h == pytest.approx(
        100.0 + weib.remaining_quantile_h(100.0, EARLIEST_P)
    )
    assert fc.to_limit.latest_h == pytest.approx(100.0 + weib.remaining_quantile_h(100.0, LATEST_P))


def test_flat_readings():
    t = np.linspace(10.0, 300.0, 15)
    y = 0.5 + np.random.default_rng(1).normal(0.0, 0.01, t.size)
    fc = run(t, y, clean=0.3)
    assert (fc.state, fc.to_limit) == ("flat", None)
    with_lives = run(t, y, clean=0.3, earlier=lives_only([900.0, 1000.0, 1100.0]))
    assert (with_lives.state, with_lives.basis) == ("flat", "service-life")
    assert with_lives.to_limit.likely_h > 300.0


def test_few_readings_are_weighed_against_earlier_lives():
    # Four early readings of a slow exponential: alone, the trend sees an almost straight line
    # and puts the limit several lives away; earlier lives pull it back.
    t = np.array([100.0, 200.0, 300.0, 400.0])
    y = exp_curve(t) + np.random.default_rng(2).normal(0.0, 0.005, t.size)
    alone = run(t, y, clean=0.3)
    lives = [900.0, 950.0, 1000.0, 1050.0, 1100.0]
    weighed = run(t, y, clean=0.3, earlier=lives_only(lives))
    assert weighed.basis == "trend" and "earlier lives" in weighed.note
    assert abs(weighed.to_limit.likely_h - 1000.0) < abs(alone.to_limit.likely_h - 1000.0)
    assert 900.0 < weighed.to_limit.likely_h < 1300.0


def test_past_limit_still_forecasts_the_bypass():
    t, y = readings(cubic_curve, 1050.0, n=21)
    assert y[-1] >= LIMIT
    fc = run(t, y, clean=0.2, bypass=BYPASS)
    assert (fc.state, fc.to_limit) == ("past-limit", None)
    truth = true_crossing(cubic_curve, level=BYPASS)
    assert fc.to_bypass.likely_h == pytest.approx(truth, rel=0.05)


def test_past_limit_without_a_bypass_setting():
    fc = run([100.0, 200.0, 300.0, 400.0], [0.5, 0.9, 1.6, 2.1])
    assert (fc.state, fc.basis, fc.to_limit, fc.to_bypass) == ("past-limit", "none", None, None)


def test_past_bypass():
    fc = run([100.0, 200.0, 300.0], [0.5, 1.2, 2.6], bypass=BYPASS)
    assert (fc.state, fc.to_limit, fc.to_bypass) == ("past-bypass", None, None)


def test_no_limits():
    t, y = readings(exp_curve, 750.0)
    fc = run(t, y, limit=None)
    assert (fc.state, fc.basis, fc.to_limit, fc.to_bypass) == ("no-limits", "none", None, None)
    only_bypass = run(t, y, limit=None, bypass=BYPASS, clean=0.3)
    assert only_bypass.state == "no-limits" and only_bypass.to_bypass is not None


def test_stale_readings_say_check_now():
    t, y = readings(cubic_curve, 800.0)
    fc = run(t, y, clean=0.2, now=1500.0)
    assert fc.state == "check-now"
    assert fc.to_limit.likely_h < 1500.0


def test_fitted_curve_follows_the_readings():
    t, y = readings(cubic_curve, 700.0)
    fc = run(t, y, clean=0.2)
    for age in (100.0, 400.0, 700.0):
        assert fc.dp_at(age) == pytest.approx(float(cubic_curve(age)), abs=0.05)
    assert math.isnan(fc.dp_at(-5.0))


def history(curve, lives, seed=0, n=25, noise=0.01, **kw):
    """Earlier elements loading along one shape, each stretched to its own life."""
    rng = np.random.default_rng(seed)
    out = []
    for life in lives:
        t = np.sort(rng.uniform(0.0, life, n))
        y = curve(t, life_h=life, **kw) + rng.normal(0.0, noise, n)
        out.append(PastElement(tuple(t), tuple(y), life, True))
    return out


def test_earlier_curves_carry_the_forecast_early():
    # Half-way through life, an exponential loading curve still looks nearly straight: alone,
    # the trend cannot tell when the turn comes, earlier elements' curves can.
    earlier = history(exp_curve, [900.0, 950.0, 1000.0, 1050.0, 1100.0, 980.0, 1020.0])
    t, y = readings(exp_curve, 500.0, life_h=1000.0)
    fc = run(t, y, clean=0.3, bypass=BYPASS, earlier=earlier)
    assert fc.basis == "earlier-curves"
    assert fc.to_limit.likely_h == pytest.approx(1000.0, rel=0.05)
    assert fc.to_limit.earliest_h <= 1000.0 <= fc.to_limit.latest_h
    assert fc.to_bypass.likely_h > fc.to_limit.likely_h
    alone = run(t, y, clean=0.3)
    assert abs(alone.to_limit.likely_h - 1000.0) > abs(fc.to_limit.likely_h - 1000.0)


def test_earlier_curves_follow_a_faster_element():
    # Same shape, but this element loads 30 % faster than any earlier one (dirtier oil):
    # the readings must stretch the curves beyond the lives the history knows.
    earlier = history(exp_curve, [950.0, 1000.0, 1050.0, 1000.0])
    t, y = readings(exp_curve, 560.0, n=28, life_h=700.0)
    fc = run(t, y, clean=0.3, earlier=earlier)
    assert fc.to_limit.likely_h == pytest.approx(700.0, rel=0.08)


def test_unlike_earlier_curves_are_set_aside():
    # Earlier elements loaded along an exponential; this one rises in a straight line.
    earlier = history(exp_curve, [900.0, 1000.0, 1100.0])
    t, y = readings(line_curve, 150.0, n=12, life_h=300.0)
    fc = run(t, y, clean=0.4, earlier=earlier)
    assert fc.basis == "trend"
    assert fc.to_limit.likely_h == pytest.approx(300.0, rel=0.05)


def test_template_is_rising_and_ends_at_the_limit():
    # Readings written to a 0.05 bar gauge step, with a noisy dip: the template must still rise.
    t = np.linspace(10.0, 950.0, 30)
    y = np.round(exp_curve(t) / 0.05) * 0.05
    y[10] -= 0.1
    tpl = make_template(t, y, 1000.0, LIMIT)
    assert np.all(np.diff(tpl.g) > 0)
    assert tpl.f[-1] == 1.0 and tpl.g[-1] == pytest.approx(LIMIT)
    assert tpl.inverse(np.array([LIMIT]))[0] == pytest.approx(1.0)


def test_bad_input():
    with pytest.raises(BookError):
        run([1.0, 2.0], [0.3])
    with pytest.raises(BookError):
        run([1.0, 2.0, 3.0], [0.3, 0.4, 0.5], bypass=1.5)  # bypass below the limit
    with pytest.raises(BookError):
        run([1.0, 2.0, 30.0], [0.3, 0.4, 0.5], now=10.0)  # a reading from the future
    with pytest.raises(BookError):
        run([1.0, 2.0, 3.0], [0.3, float("nan"), 0.5])
    with pytest.raises(BookError):
        run([1.0, 2.0, 3.0], [0.3, 0.4, 0.5], clean=2.5)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.tuples(st.floats(0.0, 2000.0), st.floats(0.0, 3.0)), min_size=0, max_size=40),
    st.booleans(),
)
def test_any_readings_give_an_ordered_answer(pairs, with_history):
    # Property: whatever the readings, the forecast is one of the documented states, and any
    # interval it gives is ordered and lies after the last reading below the level.
    t = [a for a, _ in pairs]
    y = [d for _, d in pairs]
    earlier = history(exp_curve, [900.0, 1000.0, 1100.0]) if with_history else ()
    fc = run(t, y, bypass=BYPASS, now=max(t, default=0.0), earlier=earlier)
    assert fc.state in {
        "ok", "check-now", "past-limit", "past-bypass", "too-few-readings", "no-readings",
        "flat", "no-limits",
    }  # fmt: skip
    assert (fc.to_limit is not None or fc.to_bypass is not None) == (fc.basis != "none")
    for iv in (fc.to_limit, fc.to_bypass):
        if iv is not None:
            assert iv.earliest_h <= iv.likely_h <= iv.latest_h
    if fc.to_limit is not None and fc.basis != "service-life":
        assert fc.to_limit.earliest_h >= max(t)


# ---- recalibration of the earlier-curves interval (store/forecast/trend_calibration.py) ------------------


def test_conformal_points_take_the_textbook_ranks():
    from store.forecast.trend_calibration import conformal_high, conformal_low

    # split conformal (Vovk et al.; Angelopoulos & Bates 2021, from memory): with n = 19
    # scores the 95 % point is the ceil(0.95 x 20) = 19th smallest, the 5 % point the
    # floor(0.05 x 20) = 1st; with n = 39, the 38th and the 2nd
    v = list(range(19, 0, -1))
    assert conformal_high(v, 0.95) == 19 and conformal_low(v, 0.05) == 1
    v = list(range(1, 40))
    assert conformal_high(v, 0.95) == 38 and conformal_low(v, 0.05) == 2


def test_derived_factors_follow_the_held_out_ratios():
    from store.forecast.trend_calibration import Sample, derive

    # bin p < 0.6: last reading 20 h, likely 100 h (p = 0.2), earliest 60 h, latest 140 h:
    # remaining 80 / 40 / 120 h; true remaining lives 30, 32, ... 106 h (39 samples)
    samples = [Sample(20.0, 60.0, 100.0, 140.0, 20.0 + r) for r in range(30, 108, 2)]
    cal = derive(samples)
    assert cal.n == (39, 0, 0)
    assert cal.earliest[0] == pytest.approx(32 / 40)  # 2nd smallest true remaining / 40
    assert cal.likely[0] == pytest.approx(68 / 80)  # median true remaining / 80
    assert cal.latest[0] == pytest.approx(104 / 120)  # 38th smallest / 120
    assert cal.earliest[1:] == (1.0, 1.0)  # empty bins keep 1


def test_recalibration_only_widens_and_keeps_the_order():
    from store.forecast.trend_calibration import Calibration, apply

    cal = Calibration((1.3, 0.5, 0.5), (0.9, 0.9, 0.9), (0.7, 1.2, 1.2))
    # p = 20 / 100 = 0.2: earliest factor 1.3 would narrow (capped at 1), latest 0.7 likewise
    assert apply(cal, 20.0, (60.0, 100.0, 140.0)) == pytest.approx((60.0, 92.0, 140.0))
    # p = 90 / 100 = 0.9: earliest remaining halves, latest stretches by 1.2
    assert apply(cal, 90.0, (95.0, 100.0, 110.0)) == pytest.approx((92.5, 99.0, 114.0))
    # the bypass uses the change limit's progress
    assert apply(cal, 90.0, (95.0, 300.0, 400.0), progress=0.9)[0] == pytest.approx(92.5)


def test_the_shipped_recalibration_moves_the_earlier_curves_interval_only():
    from store.forecast.trend_calibration import IDENTITY

    t, y = readings(exp_curve, 600.0, n=12)
    past = [
        PastElement(tuple(tt), tuple(yy), life, True)
        for life in (900.0, 1000.0, 1100.0)
        for tt, yy in [readings(exp_curve, life * 0.999, n=30, life_h=life)]
    ]
    raw = forecast(ElementReadings(tuple(t), tuple(y)), None, LIMIT, None, 600.0, past, IDENTITY)
    cal = forecast(ElementReadings(tuple(t), tuple(y)), None, LIMIT, None, 600.0, past)
    assert raw.basis == cal.basis == "earlier-curves"
    assert cal.to_limit.earliest_h <= raw.to_limit.earliest_h
    assert cal.to_limit.latest_h >= raw.to_limit.latest_h
    only_trend = run(t, y)  # no earlier elements: the trend, never recalibrated
    assert only_trend.basis == "trend"


# ---- is this element loading clearly faster? ----------------------------------------------------


def test_pace_is_flagged_beyond_the_spread_of_the_earlier_lives():
    from store.forecast.trend import loading_pace

    lives = [900.0, 950.0, 1000.0, 1050.0, 1100.0, 1000.0]
    # sd of the log lives 0.067: exp(2 x 0.067) = 1.14 is under the 1.2 floor
    # (common practice, no source), so the threshold is 1.2
    fast = loading_pace(800.0, lives)
    assert fast.threshold == pytest.approx(1.2) and fast.n == 6
    assert fast.ratio == pytest.approx(1000 / 800) and fast.fast
    assert not loading_pace(850.0, lives).fast  # 1.18x: within the floor
    wide = [500.0, 700.0, 1000.0, 1400.0, 2000.0, 1000.0]  # sd of log lives 0.49
    w = loading_pace(450.0, wide)
    assert w.threshold == pytest.approx(math.exp(2 * np.std(np.log(wide), ddof=1)))
    assert w.ratio > 2.0 and not w.fast  # twice their median pace is inside so wide a spread
    assert loading_pace(800.0, lives[:2]) is None  # two lives show no spread
    # only the last six count
    assert loading_pace(800.0, [100.0] * 5 + lives).n == 6


def knee_curve(t, life_h=1000.0, clean=0.3):
    """A slow start, then a sharp late turn to LIMIT at life_h (our own model: the shape of
    the rig runs in tests/benchmarks/clogging.py, which no free growth shape follows)."""
    u = np.asarray(t, dtype=float) / life_h
    return clean + 0.4 * np.sqrt(u) + (LIMIT - clean - 0.4) * u**8


def test_an_element_faster_than_every_earlier_one_gets_an_earlier_date():
    # issue 11: six earlier elements of 950-1050 h on one shape; the current one follows the
    # same shape to a 650 h life. Read to 75 % of it, the earlier curves carry the forecast,
    # and the date must come well before every earlier life, with the crossing inside.
    past = [
        PastElement(tuple(tt), tuple(yy), life, True)
        for life in (950.0, 1000.0, 1050.0, 980.0, 1020.0, 1000.0)
        for tt, yy in [readings(knee_curve, life * 0.999, n=40, life_h=life)]
    ]
    true_h = 650.0  # knee_curve reaches LIMIT at life_h by construction
    t, y = readings(knee_curve, 0.75 * true_h, n=22, life_h=true_h)
    fc = run(t, y, earlier=past)
    assert fc.basis == "earlier-curves"
    assert fc.to_limit.likely_h < 0.8 * 950.0
    assert fc.to_limit.earliest_h <= true_h <= fc.to_limit.latest_h
    # an element at the usual pace stays with the earlier lives
    t, y = readings(knee_curve, 600.0, n=18, life_h=1000.0)
    usual = run(t, y, earlier=past)
    assert usual.to_limit.earliest_h <= 1000.0 <= usual.to_limit.latest_h


def test_beyond_history_widens_by_the_excess_over_the_earlier_lives():
    from store.forecast.trend_history import beyond_history

    lives = [200.0, 230.0, 250.0]
    # 180 h is 0.9x the shortest earlier life: the earliest remaining life shrinks by 0.9
    assert beyond_history(180.0, lives) == pytest.approx((0.9, 1.0))
    # 300 h is 1.2x the longest: the latest remaining life grows by 1.2
    assert beyond_history(300.0, lives) == pytest.approx((1.0, 1.2))
    assert beyond_history(220.0, lives) == (1.0, 1.0)  # bracketed: nothing changes


def test_an_element_beyond_the_earlier_lives_gets_a_wider_earliest_side(monkeypatch):
    # issue 11: the fastest condition's "earliest" came after the crossing at 85 % of life.
    # The same forecast with the widening switched off is the reference: the earliest remaining
    # life must shrink by the matched life over the shortest earlier life (about 650 / 950; the
    # matched life is the stretch at which the curves reach the limit, so near the likely age),
    # the likely age stay; an element inside the earlier lives must not move.
    import store.forecast.trend as trend_mod
    from store.forecast.trend_calibration import IDENTITY

    past = [
        PastElement(tuple(tt), tuple(yy), life, True)
        for life in (950.0, 1000.0, 1050.0, 980.0, 1020.0, 1000.0)
        for tt, yy in [readings(knee_curve, life * 0.999, n=40, life_h=life)]
    ]

    def both(t, y):
        args = (ElementReadings(tuple(t), tuple(y)), None, LIMIT, None, float(t[-1]), past)
        with monkeypatch.context() as m:
            m.setattr(trend_mod, "beyond_history", lambda life, lives: (1.0, 1.0))
            off = forecast(*args, IDENTITY)
        return forecast(*args, IDENTITY), off, float(t[-1])

    on, off, last = both(*readings(knee_curve, 0.85 * 650.0, n=26, life_h=650.0))
    assert on.basis == off.basis == "earlier-curves"
    assert on.to_limit.likely_h == off.to_limit.likely_h
    assert on.to_limit.latest_h == off.to_limit.latest_h
    shrink = (on.to_limit.earliest_h - last) / (off.to_limit.earliest_h - last)
    assert shrink == pytest.approx(off.to_limit.likely_h / 950.0, rel=0.03)
    assert shrink < 0.8
    on, off, _ = both(*readings(knee_curve, 850.0, n=26, life_h=1000.0))
    assert on.to_limit == off.to_limit


def _accelerating_log(seed):
    """8 readings of a new element whose excess over clean grows exponentially (the shape of
    DOMAIN.md §4), read to a 0.01 or 0.05 bar gauge with 0.01 bar scatter; invented values."""
    rng = np.random.default_rng(seed)
    clean, limit = rng.uniform(0.3, 0.6), rng.uniform(2.0, 3.0)
    k, life_h, step = rng.uniform(1.0, 4.0), rng.uniform(200, 800), rng.choice([0.01, 0.05])
    scale = (limit - clean) / np.expm1(k)
    t = np.sort(rng.uniform(0.05, rng.uniform(0.5, 0.85), 8)) * life_h
    y = clean + scale * np.expm1(k * t / life_h) + rng.normal(0.0, 0.01, 8)
    return clean, limit, life_h, t, np.round(y / step) * step


def test_few_clearly_accelerating_readings_do_not_put_the_earliest_after_the_crossing():
    # Issue 23: with 8 readings AICc charged a curved shape's extra parameter so much that a
    # straight line carried the forecast over readings that clearly bend up, and its earliest
    # date came after the crossing where exponential and quadratic fits crossed days sooner.
    # "Clearly accelerating": the quadratic term of a scipy curve_fit is 3 standard errors
    # above zero (scipy as the reference fitter).
    from scipy.optimize import curve_fit

    logs = late = line_led = 0
    for seed in range(600):
        clean, limit, life_h, t, y = _accelerating_log(seed)
        if np.unique(t).size < t.size:
            continue
        coef, cov = curve_fit(lambda s, c, b, a: c + b * s + a * s * s, t / life_h, y)
        if coef[2] < 3 * math.sqrt(cov[2, 2]):
            continue
        logs += 1
        fc = forecast(ElementReadings(tuple(t), tuple(y)), clean, limit, limit / 0.78, t[-1])
        if fc.to_limit is not None and fc.to_limit.earliest_h > life_h:
            late += 1
            line_led += fc.model.startswith("straight line")
    assert logs > 400
    # The earliest is the 5 % point of the cloud; with the generating shape among the
    # candidates it should come after the crossing in well under 1 log in 200.
    assert late <= logs / 200, (late, logs)
    assert line_led == 0


def test_a_kept_earlier_curve_answers_as_a_fresh_one():
    """The earlier elements' curves are kept between forecasts (a pure function's results,
    `trend._kept_template`): the second forecast on the same history, and one given the
    history as lists (never kept), answer exactly as the first; a kept curve is read-only.
    # the cache's transparency: the reference is the uncached computation itself"""
    from store.forecast import trend

    trend._kept_template.cache_clear()
    earlier = history(exp_curve, [900.0, 950.0, 1000.0, 1050.0, 1100.0], seed=3)
    t, y = readings(exp_curve, 500.0, life_h=1000.0)
    first = run(t, y, clean=0.3, bypass=BYPASS, earlier=earlier)
    assert trend._kept_template.cache_info().hits == 0
    again = run(t, y, clean=0.3, bypass=BYPASS, earlier=earlier)
    assert trend._kept_template.cache_info().hits >= len(earlier)
    as_lists = [PastElement(list(e.ages_h), list(e.dp_ref_bar), e.life_h, True) for e in earlier]
    fresh = run(t, y, clean=0.3, bypass=BYPASS, earlier=as_lists)
    ages = [float(a) for a in np.linspace(0.0, 1500.0, 31)]
    for fc in (again, fresh):
        assert (fc.state, fc.basis, fc.to_limit, fc.to_bypass) == (
            first.state, first.basis, first.to_limit, first.to_bypass,
        )  # fmt: skip
        assert np.array_equal(
            [fc.dp_at(a) for a in ages], [first.dp_at(a) for a in ages], equal_nan=True
        )
    assert first.basis == "earlier-curves"  # the curves were read
    kept = trend._kept_template(earlier[0].ages_h, earlier[0].dp_ref_bar, 900.0, LIMIT)
    with pytest.raises(ValueError):
        kept.g[0] = 0.0


def _huber_by_definition(z: float, k: float) -> float:
    # Huber (1964), "Robust estimation of a location parameter": z²/2 for |z| <= k,
    # k|z| - k²/2 beyond; written out here one value at a time.
    if math.isnan(z):
        return math.nan
    return 0.5 * z * z if abs(z) <= k else k * abs(z) - 0.5 * k * k


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(allow_nan=True, allow_infinity=True, width=64), min_size=1, max_size=40),
    st.integers(1, 3),
)
def test_huber_loss_is_the_definition_on_every_value_and_leaves_its_input(values, rows):
    from store.forecast.trend_models import HUBER_K, huber_rho

    z = np.array(values * rows, dtype=float).reshape(rows, len(values))
    before = z.copy()
    with np.errstate(all="ignore"):  # squares of values near the float limit overflow to inf
        got = huber_rho(z)
    want = np.array([[_huber_by_definition(v, HUBER_K) for v in row] for row in z.tolist()])
    assert np.array_equal(got, want, equal_nan=True)
    assert np.array_equal(z, before, equal_nan=True)  # worked in place, but not in its input
    edges = np.array([HUBER_K, -HUBER_K, 0.0, -0.0])
    assert huber_rho(edges).tolist() == [_huber_by_definition(v, HUBER_K) for v in edges]
    assert float(huber_rho(np.float64(3.5))) == _huber_by_definition(3.5, HUBER_K)
    whole = np.array([-3, 0, 1, 2])  # whole numbers: the same as their floats
    assert huber_rho(whole).tolist() == [_huber_by_definition(v, HUBER_K) for v in whole]
