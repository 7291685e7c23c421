"""When will this element reach its change limit (and its bypass setting)?

Everything here is in element age (hours since the element went in) and normalised ΔP (bar);
turning ages into calendar dates is the caller's job.

Three ways to a forecast, in order of preference:

- "earlier-curves": the readings matched against the loading curves of earlier elements on the
  position, stretched in time (store/forecast/trend_history.py), the interval recalibrated on held-out
  conditions (store/forecast/trend_calibration.py). Used when at least two earlier elements ran to the
  limit with logged readings and their curves fit the readings about as well as a free growth
  curve does.
- "trend": growth curves fitted to this element's readings alone (store/forecast/trend_models.py). With
  few readings the trend is weighed against how long earlier elements lasted (Weibull).
- "service-life": the Weibull of earlier lives, given that the element has lasted so far
  (store/forecast/life.py). Used when the readings cannot carry a trend.

States: "ok", "check-now" (the limit was probably reached after the last reading), "past-limit",
"past-bypass", "too-few-readings", "no-readings", "flat", "no-limits". A forecast date exists
exactly when to_limit (or to_bypass) is not None; `basis` says where it comes from.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from store.base.errors import BookError
from store.forecast.life import WeibullFit, fit_weibull
from store.forecast.trend_calibration import SHIPPED, Calibration, apply
from store.forecast.trend_history import Template, beyond_history, fit_history, make_template
from store.forecast.trend_models import LINE, TrendFit, aicc, fit_trend, huber_rho

EARLIEST_P, LIKELY_P, LATEST_P = 0.05, 0.50, 0.95
MIN_READINGS = 3  # distinct ages needed before the readings say anything about a trend
TEMPER_BELOW = 8  # with fewer readings, a trend is weighed against earlier lives
SIGMA_FLOOR_SHARE = 0.01  # readings are taken as no better than 1 % of the limit
HISTORY_AICC_MARGIN = 10.0  # earlier curves must fit nearly as well as a free growth curve
FLAT_SLOPE_Z = 2.0  # a rise smaller than two standard errors is no rise
MAX_TEMPLATES = 30  # the most recent earlier curves used (keeps a forecast within ~25 ms)
_CURVE_POINTS = 120


class ForecastInputError(BookError):
    """Readings or settings that cannot be forecast from."""


@dataclass(frozen=True)
class AgeInterval:
    """Element ages (h): 5 % point, median and 95 % point. latest_h may be math.inf."""

    earliest_h: float
    likely_h: float
    latest_h: float


@dataclass(frozen=True)
class ElementReadings:
    """Normalised ΔP readings of the current element since it went in."""

    ages_h: tuple[float, ...]
    dp_ref_bar: tuple[float, ...]


@dataclass(frozen=True)
class PastElement:
    """An earlier element on this or a like position: its readings and how long it lasted.

    reached_limit False means it was taken out before reaching the limit (right-censored).
    """

    ages_h: tuple[float, ...]
    dp_ref_bar: tuple[float, ...]
    life_h: float
    reached_limit: bool


@dataclass(frozen=True)
class Forecast:
    """What the readings say about the element's change limit and bypass setting."""

    state: str
    basis: str  # "earlier-curves", "trend", "service-life" or "none"
    model: str | None
    to_limit: AgeInterval | None
    to_bypass: AgeInterval | None
    note: str
    curve: tuple[tuple[float, float], ...] = ()  # (age_h, dp_bar) of the fitted curve
    n_readings: int = 0

    def dp_at(self, age_h: float) -> float:
        """ΔP of the fitted curve at an element age; NaN outside the curve or without one."""
        if not self.curve or not self.curve[0][0] <= age_h <= self.curve[-1][0]:
            return math.nan
        ages, dps = zip(*self.curve, strict=True)
        return float(np.interp(age_h, ages, dps))


# ---------------------------------------------------------------------------------------------
# Input checks


def _positive_or_none(value: float | None, what: str) -> float | None:
    if value is None:
        return None
    if not math.isfinite(value) or value <= 0:
        raise ForecastInputError(f"{what} must be a positive ΔP in bar, not {value}")
    return float(value)


def prepare_readings(ages_h: Sequence[float], dp_bar: Sequence[float]) -> tuple[np.ndarray, ...]:
    """Sort readings by age and average those logged at the same age.

    Returns (ages, dp, count per age).
    """
    t = np.asarray(list(ages_h), dtype=float)
    y = np.asarray(list(dp_bar), dtype=float)
    if t.shape != y.shape:
        raise ForecastInputError("each reading needs one age and one ΔP")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(y))):
        raise ForecastInputError("readings must be finite numbers")
    if np.any(t < 0):
        raise ForecastInputError("a reading cannot be older than its element")
    ages, inverse, counts = np.unique(t, return_inverse=True, return_counts=True)
    dp = np.bincount(inverse, weights=y, minlength=ages.size) / counts
    return ages, dp, counts.astype(float)


# ---------------------------------------------------------------------------------------------
# Small helpers


def weighted_quantiles(
    values: np.ndarray, weights: np.ndarray, probs: Sequence[float]
) -> list[float]:
    """Quantiles of a weighted sample (values may hold +inf; zero weights are ignored)."""
    keep = weights > 0
    values, weights = values[keep], weights[keep]
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    cum = np.cumsum(w)
    total = cum[-1]
    mid = (cum - 0.5 * w) / total
    finite = np.isfinite(v)
    out = []
    for p in probs:
        if not finite.any() or p > mid[finite][-1] + 0.5 * w[finite][-1] / total:
            out.append(math.inf)
        elif p <= mid[0]:
            out.append(float(v[0]))
        else:
            out.append(float(np.interp(p, mid[finite], v[finite])))
    return out


def _interval(ages: np.ndarray, weights: np.ndarray) -> AgeInterval | None:
    if not np.any(weights > 0):
        return None
    lo, mid, hi = weighted_quantiles(ages, weights, (EARLIEST_P, LIKELY_P, LATEST_P))
    if not math.isfinite(mid):
        return None
    return AgeInterval(lo, mid, hi)


def _service_life(fit: WeibullFit, survived_h: float) -> AgeInterval:
    return AgeInterval(
        *(
            survived_h + fit.remaining_quantile_h(survived_h, p)
            for p in (EARLIEST_P, LIKELY_P, LATEST_P)
        )
    )


def _lives(earlier: Sequence[PastElement]) -> WeibullFit | None:
    failed = [e.life_h for e in earlier if e.reached_limit]
    censored = [e.life_h for e in earlier if not e.reached_limit]
    return fit_weibull(failed, censored)


def _line_slope_z(trend: TrendFit) -> float:
    line = next(f for f in trend.fits if f.family is LINE)
    sd = trend.sigma_bar * math.sqrt(max(float(line.cov[0, 1, 1]), 0.0))
    return float(line.a[0]) / sd if sd > 0 else (math.inf if line.a[0] > 0 else 0.0)


def _sample_curve(dp_at, ages_end_h: float) -> tuple[tuple[float, float], ...]:
    ages = np.linspace(0.0, ages_end_h, _CURVE_POINTS)
    dp = np.asarray(dp_at(ages), dtype=float)
    return tuple((float(a), float(d)) for a, d in zip(ages, dp, strict=True) if math.isfinite(d))


# ---------------------------------------------------------------------------------------------
# The entry point


def forecast(
    readings: ElementReadings,
    clean_bar: float | None,
    limit_bar: float | None,
    bypass_bar: float | None,
    now_age_h: float,
    earlier: Sequence[PastElement] = (),
    calibration: Calibration = SHIPPED,
) -> Forecast:
    """Forecast the ages at which this element reaches its change limit and bypass setting.

    readings: the current element's normalised ΔP since it went in (any order; readings at the
    same age are averaged). clean_bar, limit_bar, bypass_bar: settings of the position (None
    where not set). now_age_h: the element's age now (readings may be older). earlier: earlier
    elements on this and like positions, oldest first. calibration: factors on the
    earlier-curves interval (store/forecast/trend_calibration.py; IDENTITY for the raw interval).
    """
    limit = _positive_or_none(limit_bar, "the change limit")
    bypass = _positive_or_none(bypass_bar, "the bypass setting")
    _check_settings(clean_bar, limit, bypass, now_age_h)
    t, y, w = prepare_readings(readings.ages_h, readings.dp_ref_bar)
    n = int(t.size)
    t_last = float(t[-1]) if n else 0.0
    if t_last > now_age_h * (1 + 1e-9) + 1e-9:
        raise ForecastInputError("a reading is later than the element's present age")
    weib = _lives(earlier) if earlier else None

    if limit is None and bypass is None:
        return Forecast(
            "no-limits", "none", None, None, None, "No change limit is set.", n_readings=n
        )
    y_last = float(y[-1]) if n else -math.inf
    if bypass is not None and y_last >= bypass:
        text = f"The last reading is at or over the bypass setting ({bypass:.3g} bar)."
        return Forecast("past-bypass", "none", None, None, None, text, n_readings=n)
    state = "no-limits" if limit is None else "past-limit" if y_last >= limit else "ok"
    # Levels still ahead, lowest first: the change limit (unless passed), then the bypass.
    levels = ([limit] if state == "ok" else []) + ([bypass] if bypass is not None else [])
    if not levels:
        return Forecast(
            state, "none", None, None, None, _state_text(state, t_last).strip(), n_readings=n
        )

    if n < MIN_READINGS:
        word = "no-readings" if n == 0 else "too-few-readings"
        why = f"{n} reading{'s' if n != 1 else ''} cannot carry a trend"
        if state == "ok" and weib is not None:
            return _from_lives(word, n, weib, t_last, now_age_h, why)
        return Forecast(
            word if state == "ok" else state, "none", None, None, None, why + ".", n_readings=n
        )

    floor = SIGMA_FLOOR_SHARE * (limit if limit is not None else bypass)  # type: ignore[operator]
    trend = fit_trend(t, y, w, clean_bar, floor)
    basis, model, dp_at, cloud = "trend", trend.describe(), trend.dp_at, None
    outside = (1.0, 1.0)  # widening of the earlier-curves interval beyond the earlier lives
    templates = _templates(earlier, limit if limit is not None else bypass)  # type: ignore[arg-type]
    if len(templates) >= 2:
        hist = fit_history(t, y, w, templates, trend.sigma_bar, floor)
        k_trend = trend.best.family.n_params
        aicc_trend = aicc(_loss(trend.dp_at, t, y, w, trend.sigma_bar), k_trend, w.sum())
        aicc_hist = aicc(_loss(hist.dp_at, t, y, w, trend.sigma_bar), 3, w.sum())
        if aicc_hist <= aicc_trend + HISTORY_AICC_MARGIN:
            basis, model, dp_at = "earlier-curves", f"{len(templates)} earlier curves", hist.dp_at
            cloud = hist.crossings(tuple(levels))
            outside = beyond_history(hist.matched_life_h(), [tp.life_h for tp in templates])
    if cloud is None:
        if state == "ok" and _line_slope_z(trend) < FLAT_SLOPE_Z:
            return _flat(n, weib, t_last, now_age_h, trend)
        cloud = trend.crossings(tuple(levels))

    ages, weights = cloud
    # The element had not reached the lowest level still ahead when it was last read.
    weights = np.where(ages[0] > t_last, weights, 0.0)
    intervals = [_interval(a, weights) for a in ages]
    if basis == "trend":
        intervals = _sooner_earliest(
            intervals, trend.crossings(tuple(levels), trend.open_weights), t_last
        )
    to_limit = intervals[0] if state == "ok" else None
    to_bypass = intervals[-1] if bypass is not None else None
    if basis == "earlier-curves":
        to_limit, to_bypass = (_widen(iv, t_last, outside) for iv in (to_limit, to_bypass))
    if basis == "earlier-curves" and to_limit is not None:
        progress = t_last / to_limit.likely_h if to_limit.likely_h > 0 else 0.0
        to_limit = AgeInterval(*apply(calibration, t_last, _ages(to_limit)))
        if to_bypass is not None:
            to_bypass = AgeInterval(*apply(calibration, t_last, _ages(to_bypass), progress))
    tempered = False
    if basis == "trend" and to_limit is not None and weib is not None and n < TEMPER_BELOW:
        # Few readings: weigh the trend against the earlier lives (given survival so far).
        new = _temper(to_limit, _service_life(weib, t_last), t_last)
        if to_bypass is not None:
            # The bypass follows the limit: stretch its ages as the limit's median moved.
            f = new.likely_h / to_limit.likely_h
            to_bypass = AgeInterval(*(a * f for a in _ages(to_bypass)))
        to_limit, tempered = new, True
    if state == "ok" and to_limit is None:
        return _flat(n, weib, t_last, now_age_h, trend)
    if state == "ok" and to_limit.likely_h <= now_age_h:  # type: ignore[union-attr]
        state = "check-now"

    if basis == "earlier-curves":
        note = f"{n} readings matched to the loading curves of {len(templates)} earlier elements."
        if to_bypass is not None:
            note += " The bypass date extends those curves beyond the change limit."
    else:
        note = f"{trend.describe().capitalize()} fitted to {n} readings."
        if tempered:
            note += f" Weighed against {_lives_text(weib)}."  # type: ignore[arg-type]
    note += _state_text(state, t_last)
    if to_limit is None and to_bypass is None:
        basis = "none"  # e.g. past the limit, and the readings do not rise towards the bypass
    ends = [now_age_h, t_last] + [iv.likely_h for iv in (to_limit, to_bypass) if iv is not None]
    curve = _sample_curve(dp_at, 1.1 * max(ends))
    return Forecast(state, basis, model, to_limit, to_bypass, note, curve, n)


def _sooner_earliest(
    intervals: list[AgeInterval | None],
    open_cloud: tuple[np.ndarray, np.ndarray],
    t_last: float,
) -> list[AgeInterval | None]:
    """Each interval with its earliest age the sooner of its own and that of the same curves
    weighed by plain AIC (TrendFit.open_weights).

    With few readings AICc charges a curved shape's extra parameter so much that a straight
    line carries the cloud even where the readings clearly bend up, and its earliest date
    could come after the crossing (issue 23: 8 accelerating readings on a new book). A loading
    curve bends up (DOMAIN.md §4), so the line is the hopeful shape: the pessimistic end must
    not rest on the small-sample charge. The likely and latest ages stay as they were.
    """
    ages, weights = open_cloud
    weights = np.where(ages[0] > t_last, weights, 0.0)
    out: list[AgeInterval | None] = []
    for iv, row in zip(intervals, ages, strict=True):
        if iv is None or not np.any(weights > 0):
            out.append(iv)
            continue
        (soon,) = weighted_quantiles(row, weights, (EARLIEST_P,))
        out.append(AgeInterval(min(iv.earliest_h, soon), iv.likely_h, iv.latest_h))
    return out


_Z90 = 1.6448536269514722  # standard normal 95 % point: the 5-95 % interval is ±_Z90 sd


def _widen(
    iv: AgeInterval | None, t_last: float, factors: tuple[float, float]
) -> AgeInterval | None:
    """The interval with its earliest and latest remaining lives (after the last reading)
    scaled by factors (store/trend_history.beyond_history); the likely age stays."""
    if iv is None or factors == (1.0, 1.0):
        return iv
    fe, fu = factors
    e = t_last + fe * max(iv.earliest_h - t_last, 0.0)
    u = t_last + fu * (iv.latest_h - t_last) if math.isfinite(iv.latest_h) else iv.latest_h
    return AgeInterval(min(e, iv.likely_h), iv.likely_h, max(u, iv.likely_h))


def _ages(iv: AgeInterval) -> tuple[float, float, float]:
    return (iv.earliest_h, iv.likely_h, iv.latest_h)


def _log_normal(iv: AgeInterval) -> tuple[float, float]:
    """Median and spread of log age read off an interval (its finite side if one is open)."""
    m = math.log(iv.likely_h)
    if math.isfinite(iv.latest_h):
        s = (math.log(iv.latest_h) - math.log(iv.earliest_h)) / (2 * _Z90)
    else:
        s = (m - math.log(iv.earliest_h)) / _Z90
    return m, max(s, 1e-6)


def _temper(trend: AgeInterval, lives: AgeInterval, t_last: float) -> AgeInterval:
    """The precision-weighted mean, in log age, of the trend's interval and the earlier lives':
    the tighter of the two pulls harder."""
    mt, st = _log_normal(trend)
    ml, sl = _log_normal(lives)
    wt, wl = 1 / st**2, 1 / sl**2
    m, s = (wt * mt + wl * ml) / (wt + wl), (wt + wl) ** -0.5
    return AgeInterval(*(max(math.exp(m + z * s), t_last) for z in (-_Z90, 0.0, _Z90)))


def _check_settings(
    clean_bar: float | None, limit: float | None, bypass: float | None, now_age_h: float
) -> None:
    if clean_bar is not None and (not math.isfinite(clean_bar) or clean_bar < 0):
        raise ForecastInputError(f"the clean-element ΔP must be zero or more, not {clean_bar}")
    if limit is not None and bypass is not None and bypass <= limit:
        raise ForecastInputError("the bypass setting must be above the change limit")
    if clean_bar is not None and limit is not None and clean_bar >= limit:
        raise ForecastInputError("the clean-element ΔP must be below the change limit")
    if not math.isfinite(now_age_h) or now_age_h < 0:
        raise ForecastInputError("the element's age must be zero or more hours")


def _loss(dp_at, t: np.ndarray, y: np.ndarray, w: np.ndarray, sigma: float) -> float:
    return float((w * huber_rho((y - dp_at(t)) / sigma)).sum())


def _templates(earlier: Sequence[PastElement], level_bar: float) -> list[Template]:
    """Curves of the earlier elements that ran to the limit; `earlier` is oldest first."""
    out: list[Template] = []
    for e in reversed(earlier):
        if len(out) == MAX_TEMPLATES:
            break
        if not e.reached_limit:
            continue
        tpl = _template(e.ages_h, e.dp_ref_bar, e.life_h, level_bar)
        if tpl is not None:
            out.append(tpl)
    return out[::-1]


# An earlier element's curve is the same for every forecast that reads it: the two of each
# status (now, and at the previous reading for the next-reading plan), every like position
# pooling that element, every save on the position until its next change. make_template is a
# pure function of the element's readings, so its curves are kept (with the interpolant each
# builds on first use) for the next forecast that asks. 512 hold a big plant's like groups
# over a whole-plant pass (an as-of list, a rebuild); a template is a few kilobytes.
@lru_cache(maxsize=512)
def _kept_template(
    ages_h: tuple[float, ...], dp_ref_bar: tuple[float, ...], life_h: float, level_bar: float
) -> Template | None:
    tpl = make_template(ages_h, dp_ref_bar, life_h, level_bar)
    if tpl is not None:  # shared from now on: no reader may change it in place
        tpl.f.flags.writeable = tpl.g.flags.writeable = False
    return tpl


def _template(
    ages_h: Sequence[float], dp_ref_bar: Sequence[float], life_h: float, level_bar: float
) -> Template | None:
    """`make_template`, kept for the next forecast where the readings are tuples (as the
    element summaries give them); made afresh where they are not."""
    if type(ages_h) is tuple and type(dp_ref_bar) is tuple:
        return _kept_template(ages_h, dp_ref_bar, life_h, level_bar)
    return make_template(ages_h, dp_ref_bar, life_h, level_bar)


def _lives_text(weib: WeibullFit) -> str:
    early = f" ({weib.n_censored} taken out early)" if weib.n_censored else ""
    return f"{weib.n_failed + weib.n_censored} earlier lives{early}"


def _state_text(state: str, t_last: float) -> str:
    if state == "check-now":
        return (
            f" The limit was probably reached after the last reading (at {t_last:.0f} h):"
            " read the gauge."
        )
    if state == "past-limit":
        return " The last reading is at or over the change limit."
    return ""


def _from_lives(
    state: str, n: int, weib: WeibullFit, t_last: float, now_age_h: float, why: str
) -> Forecast:
    """Service-life forecast: earlier lives, given the element had not reached the limit at its
    last reading (or at all, without readings)."""
    to_limit = _service_life(weib, t_last)
    if state == "ok" and to_limit.likely_h <= now_age_h:
        state = "check-now"
    note = f"{why[0].upper()}{why[1:]}; from {_lives_text(weib)}." + _state_text(state, t_last)
    return Forecast(state, "service-life", "weibull", to_limit, None, note, n_readings=n)


def _flat(
    n: int, weib: WeibullFit | None, t_last: float, now_age_h: float, trend: TrendFit
) -> Forecast:
    why = f"ΔP shows no clear rise over {n} readings"
    if weib is not None:
        return _from_lives("flat", n, weib, t_last, now_age_h, why)
    curve = _sample_curve(trend.dp_at, 1.1 * t_last)
    return Forecast("flat", "none", trend.describe(), None, None, why + ".", curve, n)


# ---------------------------------------------------------------------------------------------
# Is this element loading clearly faster than the earlier ones?

PACE_LAST = 6  # compared with the last six elements that ran to the limit
PACE_MIN_LIVES = 3  # fewer earlier lives have no spread to speak of
PACE_SPREAD_Z = 2.0  # beyond two standard deviations of the earlier log lives: about 2 % of
# elements from the same spread would pass it by chance (one-sided normal tail)
PACE_MIN_RATIO = (
    1.2  # and at least 20 % faster, however alike the earlier lives  # common practice, no source
)


@dataclass(frozen=True)
class Pace:
    """This element's expected life against the last earlier lives (ratio > 1: faster)."""

    ratio: float  # median of the earlier lives / this element's likely life
    n: int  # earlier lives compared with
    threshold: float  # the ratio beyond which it counts as clearly faster
    fast: bool


def loading_pace(likely_life_h: float, earlier_lives_h: Sequence[float]) -> Pace | None:
    """Compare the forecast life of this element with the last earlier lives (oldest first,
    only those that ran to the limit). None without enough earlier lives.

    Clearly faster: the ratio passes exp(PACE_SPREAD_Z x the standard deviation of the earlier
    log lives) and PACE_MIN_RATIO, and the likely life is shorter than every one of them.
    """
    lives = np.asarray([h for h in earlier_lives_h if h > 0][-PACE_LAST:], dtype=float)
    if lives.size < PACE_MIN_LIVES or not likely_life_h > 0 or not math.isfinite(likely_life_h):
        return None
    ratio = float(np.median(lives)) / likely_life_h
    sd = float(np.std(np.log(lives), ddof=1))
    threshold = max(math.exp(PACE_SPREAD_Z * sd), PACE_MIN_RATIO)
    fast = ratio > threshold and likely_life_h < float(lives.min())
    return Pace(ratio, int(lives.size), threshold, fast)
