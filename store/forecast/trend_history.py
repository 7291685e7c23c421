"""Forecast from the loading curves of earlier elements on the same (or a like) position.

Each earlier element that ran to its change limit leaves a curve: ΔP against the share of its
life used. Elements on one housing, fed by the same system, tend to load along the same shape,
only faster or slower. So the current readings are matched to every earlier curve stretched in
time to a candidate life L (and shifted by a small ΔP offset b for a different clean ΔP):

    dp(t) ≈ b + g_j(t / L)

The fit is scored with a Huber loss, the candidate lives carry a prior from the earlier lives,
and the crossing age of a level follows from inverting the stretched curve. The result is a
weighted cloud of crossing ages (recalibrated afterwards, store/forecast/trend_calibration.py).

The prior on L, and why. Around each earlier element's own life it is an even mixture of two
kernels in log life: "like that element" (normal, Silverman's bandwidth on the earlier log
lives, a few per cent on a steady housing) and "another condition" (Student-t, 3 degrees of
freedom, scale sqrt(2) x the standard deviation of the earlier log lives: the spread of the
difference of two lives, and never below ln 1.2, since a history of near-identical lives says
nothing about how far a changed condition moves the next one). The readings choose between
them through their likelihood: readings that follow an earlier element closely keep its tight
kernel; an element loading off every earlier curve is no longer held to their lives. Measured
on the 24 PHME 2020 runs with each (particle size, solid ratio) condition held out
(tests/benchmarks/clogging.py, raw intervals):

- the tight normal kernel alone (the earlier design): the fastest condition held out came in
  late at 85 % of life ("earliest" late in 17 % of all forecasts there);
- a Student-t with the tight scale (1 or 3 degrees of freedom): no measurable change;
- the wide Student-t alone: "earliest" late 0 / 4 / 4 % at 50 / 70 / 85 %, but the median error
  at 70 % rose from 11 % to 21 % when every element has replicates in its history;
- a flatter likelihood (loss / 2, 4, 8): wider intervals, median error 18-21 % at 70 %;
- the mixture: figures in the README ("How good is the due date?"); the ln 1.2 floor was added
  for a steady history (tests/store/test_trend.py, an element at 0.65 of every earlier life) and
  moves the headline by a few tenths of a per cent.

Beyond the history. The prior and the readings settle on a matched life (the posterior median
of the stretch L). When it lies outside the range of the earlier lives — the element loads
faster, or slower, than every earlier one — the history no longer brackets it, and nothing in
it says how much further out the truth may be. The remaining life from a reading is the
stretch times the share of the curve still ahead (ΔP now -> limit), and the readings pin that
share, not the stretch: the remaining life scales with L. The one scale the data offer for how
far the stretch may still be off is how far it already is outside the history, so the interval
is widened on that side by the same ratio again (a reflection in log life): for L below the
shortest earlier life L_min the earliest remaining life is multiplied by L / L_min, for L
above the longest L_max the latest by L / L_max (beyond_history). Inside the range nothing
changes. The rule has no constant. Measured (tests/benchmarks/clogging.py, nested
calibration, shipped factors derived again): it acts on the fastest condition held out; the
"earliest" late at 85 % of life went from 2 of 24 to 0 of 24 (both had been late by 0.1 h),
50 and 70 % stayed at 0 and 1 of 24, the errors of "likely" did not move, the median
earliest / true at 70 % went from 0.70 to 0.69, plain leave-one-out moved by under half a point.

Not tried: gauge-step readings as interval-censored data, and the blocking laws as shapes of
the earlier curves (the curves here are the earlier elements' own, not a law).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from scipy.interpolate import PchipInterpolator

from store.forecast.trend_models import HUBER_K, huber_rho, robust_scale

MIN_TEMPLATE_READINGS = 4
_N_LIVES = 200
# The prior on a candidate life around each earlier element's own life is an even mixture of
# two kernels in log life: "like this one" (normal, Silverman's bandwidth on the earlier log
# lives) and "another condition" (Student-t with PRIOR_DOF degrees of freedom, scale sqrt(2) x
# the standard deviation of the earlier log lives: the spread of the difference of two lives).
# Both scales are kept within these bounds (the wide one above _TAU_FAR_MIN).
_TAU_MIN, _TAU_MAX = 0.03, 0.5
PRIOR_DOF = 3.0  # heavy tails: readings far off every earlier curve can still win
# However alike the earlier lives, another condition can change a life by a fifth (a wrong
# element, an ingress): the wide kernel is never narrower than ln 1.2.  # common practice, no source
_TAU_FAR_MIN = math.log(1.2)


@dataclass(frozen=True, eq=False)
class Template:
    """An earlier element's curve: ΔP (bar) against life fraction, strictly rising."""

    f: np.ndarray
    g: np.ndarray
    life_h: float

    def at(self, f: np.ndarray) -> np.ndarray:
        """ΔP at life fractions f, continued beyond the end along the last slope."""
        f = np.asarray(f, dtype=float)
        out = np.asarray(np.interp(f, self.f_fine, self.g_fine))  # (an array for one f too)
        beyond = f > self.f[-1]
        # The line only where it is needed (a match asks for 200 lives x every reading, few
        # of them past the curve's end): the same values as working it out everywhere.
        if beyond.any():
            out[beyond] = self.g[-1] + self.end_slope * (f[beyond] - self.f[-1])
        return out

    def inverse(self, dp: np.ndarray) -> np.ndarray:
        """Life fraction at which the curve reaches dp (0 below its start)."""
        out = np.interp(dp, self.g_fine, self.f_fine)
        beyond = self.f[-1] + (dp - self.g[-1]) / self.end_slope
        return np.where(dp > self.g[-1], beyond, out)

    @cached_property
    def end_slope(self) -> float:
        chord = (self.g[-1] - self.g[-2]) / (self.f[-1] - self.f[-2])
        return float(max(self._pchip.derivative()(self.f[-1]), chord))

    @cached_property
    def _pchip(self):
        return PchipInterpolator(self.f, self.g)

    @cached_property
    def f_fine(self) -> np.ndarray:
        return np.unique(np.r_[np.linspace(0.0, self.f[-1], 401), self.f])

    @cached_property
    def g_fine(self) -> np.ndarray:
        g = np.maximum.accumulate(self._pchip(self.f_fine))
        return g + np.arange(g.size) * 1e-12 * max(abs(g[-1]), 1.0)


def _isotonic(y: np.ndarray) -> np.ndarray:
    """Least-squares non-decreasing fit (pool adjacent violators)."""
    vals: list[float] = []
    wts: list[float] = []
    for yi in y.tolist():  # Python floats: the same values, without a numpy scalar each
        vals.append(yi)
        wts.append(1.0)
        while len(vals) > 1 and vals[-2] > vals[-1]:
            v, wt = vals.pop(), wts.pop()
            vals[-1] = (vals[-1] * wts[-1] + v * wt) / (wts[-1] + wt)
            wts[-1] += wt
    return np.repeat(vals, np.array(wts, dtype=int))


def _run_means(f: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> list[float]:
    """`f[s:e].mean()` for each run, the same numbers with less work: numpy adds fewer than 8
    values one by one, in order (its pairwise sum works in blocks of 8 from there on), so
    short runs are added up here; longer ones are left to numpy."""
    values = f.tolist()
    out = []
    for s, e in zip(starts.tolist(), ends.tolist(), strict=True):
        n = e - s
        if n < 8:
            total = values[s]
            for x in values[s + 1 : e]:
                total += x
            out.append(total / n)
        else:
            out.append(float(f[s:e].mean()))
    return out


def make_template(
    ages_h: Sequence[float], dp_bar: Sequence[float], life_h: float, limit_bar: float
) -> Template | None:
    """A smooth rising curve from an element's readings, ending at the limit at its life.

    Readings are made monotone (ΔP of one element does not fall while it loads), runs of equal
    values (a gauge read to its step) are replaced by one point at their middle, and the curve
    ends at (1, limit) because the element was changed on reaching it. None if too sparse.
    """
    t = np.asarray(ages_h, dtype=float)
    y = np.asarray(dp_bar, dtype=float)
    ok = np.isfinite(t) & np.isfinite(y) & (t >= 0) & (t <= life_h)
    t, y = t[ok], y[ok]
    if t.size < MIN_TEMPLATE_READINGS or life_h <= 0:
        return None
    order = np.argsort(t, kind="stable")
    f = t[order] / life_h
    y = y[order]
    if f[-1] < 1.0:
        f = np.r_[f, 1.0]
        y = np.r_[y, max(limit_bar, float(y.max()))]
    f = np.r_[0.0, f]
    y = np.r_[y[0], y]
    g = _isotonic(y)
    # Middle of each run of equal values, plus the two ends.
    starts = np.r_[0, np.flatnonzero(np.diff(g) > 0) + 1]
    ends = np.r_[starts[1:], g.size]
    fm = np.array(_run_means(f, starts, ends))
    gm = g[starts]
    fm[0] = 0.0
    fm[-1] = f[-1]
    keep = np.r_[True, np.diff(fm) > 1e-9]
    fm, gm = fm[keep], gm[keep]
    if fm.size < 3 or gm[-1] <= gm[0]:
        return None
    return Template(fm, gm, float(life_h))


@dataclass(frozen=True, eq=False)
class HistoryFit:
    """Earlier curves matched to the current readings."""

    templates: tuple[Template, ...]
    lives_h: np.ndarray  # (G,) candidate lives
    log_post: np.ndarray  # (J, G) unnormalised log posterior
    offset_bar: np.ndarray  # (J, G) ΔP offsets
    sigma_bar: float

    def best_curve(self) -> tuple[Template, float, float]:
        j, i = np.unravel_index(int(np.argmax(self.log_post)), self.log_post.shape)
        return self.templates[j], float(self.lives_h[i]), float(self.offset_bar[j, i])

    def dp_at(self, ages_h: np.ndarray) -> np.ndarray:
        tpl, life, off = self.best_curve()
        return off + tpl.at(np.asarray(ages_h, dtype=float) / life)

    def matched_life_h(self) -> float:
        """The posterior median of the stretch L (over all earlier curves)."""
        w = np.exp(self.log_post - self.log_post.max()).sum(0)
        c = np.cumsum(w) / w.sum()
        return float(self.lives_h[min(int(np.searchsorted(c, 0.5)), c.size - 1)])

    def crossings(self, levels_bar: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray]:
        """Crossing ages (one row per level) and weights over all (curve, life) pairs."""
        w = np.exp(self.log_post - self.log_post.max())
        keep = w > 1e-9
        rows = []
        for level in levels_bar:
            ages = np.empty_like(self.log_post)
            for j, tpl in enumerate(self.templates):
                ages[j] = tpl.inverse(level - self.offset_bar[j]) * self.lives_h
            rows.append(ages[keep])
        return np.array(rows), w[keep]


def beyond_history(matched_life_h: float, lives_h: Sequence[float]) -> tuple[float, float]:
    """Factors on the earliest and the latest remaining life for a matched life outside the
    earlier lives (module docstring): (L / L_min, 1) below them, (1, L / L_max) above, else
    (1, 1)."""
    lo, hi = min(lives_h), max(lives_h)
    return min(matched_life_h / lo, 1.0), max(matched_life_h / hi, 1.0)


def _bandwidths(lives_h: np.ndarray) -> tuple[float, float]:
    """Scales of the two prior kernels: (like an earlier element, another condition)."""
    if lives_h.size < 2:
        return _TAU_MAX, _TAU_MAX
    sd = float(np.std(np.log(lives_h), ddof=1))
    near = 1.06 * sd * lives_h.size ** (-0.2)
    far = math.sqrt(2.0) * sd
    return min(max(near, _TAU_MIN), _TAU_MAX), min(max(far, _TAU_FAR_MIN), _TAU_MAX)


def _log_prior(grid: np.ndarray, life_h: float, taus: tuple[float, float]) -> np.ndarray:
    """Log of the prior mixture on the grid of lives (each kernel normalised on the grid)."""
    d = np.log(grid) - math.log(life_h)
    near = -0.5 * (d / taus[0]) ** 2
    far = -0.5 * (PRIOR_DOF + 1.0) * np.log1p((d / taus[1]) ** 2 / PRIOR_DOF)
    near -= np.logaddexp.reduce(near)
    far -= np.logaddexp.reduce(far)
    return np.logaddexp(near, far) - math.log(2.0)


def fit_history(
    ages_h: np.ndarray,
    dp_bar: np.ndarray,
    weights: np.ndarray,
    templates: Sequence[Template],
    sigma_bar: float,
    sigma_floor_bar: float,
) -> HistoryFit:
    """Match the readings (sorted, unique ages) against stretched earlier curves."""
    t = np.asarray(ages_h, dtype=float)
    y = np.asarray(dp_bar, dtype=float)
    w = np.asarray(weights, dtype=float)
    lives = np.array([tp.life_h for tp in templates])
    taus = _bandwidths(lives)
    tau = taus[1]
    t_last = float(t[-1])
    lo = max(float(lives.min()) * math.exp(-4 * tau), 0.8 * t_last)
    hi = max(float(lives.max()) * math.exp(4 * tau), 4.0 * t_last, 1.5 * lo)
    grid = np.geomspace(lo, hi, _N_LIVES)
    # How much clean ΔP differs between elements: spread of the earlier curves' starts.
    starts = np.array([tp.g[0] for tp in templates])
    sigma_b = max(float(np.std(starts, ddof=1)) if starts.size > 1 else 0.0, sigma_floor_bar)
    # Each stretched curve's residuals and prior do not depend on the scatter: made once.
    f = t[None, :] / grid[:, None]  # (G, n)
    curves = [(_minus(y, tpl.at(f)), _log_prior(grid, tpl.life_h, taus)) for tpl in templates]
    fit = _match(w, templates, curves, grid, sigma_bar, sigma_b)
    # The curves of earlier elements are not the current element's: when the best match leaves
    # more scatter than the readings' own noise, score with that larger scatter.
    resid = y - fit.dp_at(t)
    sigma_match = robust_scale(resid, 2, sigma_floor_bar)
    if sigma_match > 1.1 * sigma_bar:
        fit = _match(w, templates, curves, grid, sigma_match, sigma_b)
    return fit


def _minus(y: np.ndarray, curve: np.ndarray) -> np.ndarray:
    """y - curve on every row, in the curve's own array (which is not used again)."""
    return np.subtract(y[None, :], curve, out=curve)


def _match(
    w: np.ndarray,
    templates: Sequence[Template],
    curves: Sequence[tuple[np.ndarray, np.ndarray]],
    grid: np.ndarray,
    sigma_bar: float,
    sigma_b: float,
) -> HistoryFit:
    """Score every (curve, life) pair; `curves`: per template the residuals of the readings
    from it stretched to each life of the grid (G, n), and the log prior of those lives."""
    ridge = (sigma_bar / sigma_b) ** 2
    log_post = np.empty((len(templates), grid.size))
    offsets = np.empty_like(log_post)
    w_first = w.sum() + ridge  # the first pass's weights are w on every row
    for j, (r, prior) in enumerate(curves):
        # Offset b: Huber-weighted mean of the residuals, shrunk towards 0. Two passes: the
        # first with the readings' own weights, the second with Huber's weights on them
        # (1 within HUBER_K scatters, HUBER_K scatters / |residual| beyond).
        # (In place where a step's array is not needed again: the same values, without a
        # new (lives x readings) array at each step.)
        b = (w * r).sum(1) / w_first
        ww = np.subtract(r, b[:, None])
        np.abs(ww, out=ww)
        ww /= HUBER_K * sigma_bar  # |residual| in Huber scatters
        np.maximum(ww, 1.0, out=ww)
        np.divide(1.0, ww, out=ww)
        ww *= w
        b = (ww * r).sum(1) / (ww.sum(1) + ridge)
        scaled = np.subtract(r, b[:, None])
        scaled /= sigma_bar
        rho = huber_rho(scaled)
        rho *= w
        loss = rho.sum(1) + 0.5 * b * b / sigma_b**2
        log_post[j] = prior - loss
        offsets[j] = b
    return HistoryFit(tuple(templates), grid, log_post, offsets, sigma_bar)
