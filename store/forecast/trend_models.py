"""Growth curves fitted to one element's ΔP readings, with the spread of their crossing ages.

Every candidate is linear in two coefficients once its shape parameter is fixed:

    dp(t) = c + A * phi_theta(t)

- line:        phi = t                         (cake build-up at constant flow)
- exponential: phi = (exp(k t) - 1) / k        (excess over clean grows in proportion to itself)
- power:       phi = t ** p                    (slow start, then faster and faster)
- blocking:    phi = t / (T - t)               (pores closing one by one: ΔP runs away as t -> T)

The line and blocking forms are the constant-flow cake and complete-blocking laws of filtration
(Hermia's blocking laws, from memory); exponential and power are the usual empirical shapes.

The shape parameter runs over a fixed grid; for each value the coefficients are fitted with a
Huber loss (iteratively reweighted least squares), so one wild reading counts only linearly. The
grid values are weighted by their likelihood, the shapes by AICc, and the coefficient uncertainty
is drawn from the fitted covariance. The result is a weighted cloud of crossing ages per level.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

HUBER_K = 1.345
_N_DRAWS = 48
_RNG = np.random.default_rng(20_201_108)
_Z = _RNG.standard_normal((_N_DRAWS, 2))
_U = (np.arange(_N_DRAWS) + 0.5) / _N_DRAWS  # chi-square quantile levels for sigma draws
_RNG.shuffle(_U)


@dataclass(frozen=True)
class _Family:
    name: str
    n_params: int  # c, A, the shape parameter (if any) and sigma


LINE = _Family("straight line", 3)
EXPONENTIAL = _Family("exponential", 4)
POWER = _Family("power law", 4)
BLOCKING = _Family("pore blocking", 4)
FAMILIES = (LINE, EXPONENTIAL, POWER, BLOCKING)

# Shape grids in time scaled by the age of the last reading (u = t / t_last).
_K_GRID = np.geomspace(0.05, 60.0, 36)
_P_GRID = np.geomspace(0.3, 12.0, 36)
_T_GRID = 1.0 + np.geomspace(1e-3, 40.0, 36)


def _phi(family: _Family, theta: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Basis values, shape (len(theta), len(u))."""
    th = theta[:, None]
    if family is LINE:
        return np.broadcast_to(u, (theta.size, u.size)).copy()
    if family is EXPONENTIAL:
        return np.expm1(np.clip(th * u, None, 700.0)) / th
    if family is POWER:
        return np.power(np.clip(u, 0.0, None), th)
    with np.errstate(divide="ignore", invalid="ignore"):
        phi = u / (th - u)
    return np.where(u < th, phi, np.inf)


def _phi_inverse(family: _Family, theta: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Scaled time u at which the basis reaches phi (theta broadcast against phi)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if family is LINE:
            u = phi
        elif family is EXPONENTIAL:
            u = np.log1p(theta * phi) / theta
        elif family is POWER:
            u = np.power(np.clip(phi, 0.0, None), 1.0 / theta)
        else:
            u = phi * theta / (1.0 + phi)
    return np.where(phi <= 0.0, 0.0, u)


def _grid(family: _Family) -> np.ndarray:
    if family is LINE:
        return np.array([1.0])
    if family is EXPONENTIAL:
        return _K_GRID
    if family is POWER:
        return _P_GRID
    return _T_GRID


def huber_rho(z: np.ndarray) -> np.ndarray:
    """Huber loss of standardised residuals (z²/2 in the middle, linear in the tails)."""
    z = np.asarray(z, dtype=float)  # (no copy of a float array: what the forecast passes)
    # The same values, worked out in place: a forecast's match asks for this on 200 lives x
    # every reading x every earlier curve, where making each step's array anew was half of it.
    # (Each result an array, a single value's too, as np.where gave.)
    a = np.abs(z, out=np.empty_like(z))
    tails = a > HUBER_K  # (a NaN: z²/2 here, the linear part there; NaN either way)
    out = np.multiply(0.5, z, out=np.empty_like(z))
    out *= z
    a *= HUBER_K
    a -= 0.5 * HUBER_K**2
    np.copyto(out, a, where=tails)
    return out


def robust_sd(x: np.ndarray) -> float:
    """Spread of x that ignores a few wild values.

    The larger of 1.4826 x the median absolute deviation and the RMS of the 80 % smallest
    deviations over 0.66 (both equal the standard deviation for normal scatter). The second
    keeps a value when more than half the deviations are exactly 0, as with readings written
    to a gauge step.
    """
    x = np.asarray(x, dtype=float)
    if x.size == 0:
        return 0.0
    if not np.isfinite(x).all():
        d = np.abs(x - np.median(x))
        mad = 1.4826 * float(np.median(d))
        d = np.sort(d)
    else:  # the same medians, read off the sorted values (np.median costs more than a sort)
        d = np.sort(np.abs(x - _median_sorted(np.sort(x))))
        mad = 1.4826 * float(_median_sorted(d))
    kept = d[: max(1, math.ceil(0.8 * d.size))]
    return max(mad, float(np.sqrt(np.mean(kept**2))) / 0.66)


def _median_sorted(values: np.ndarray) -> np.floating:
    """np.median of finite values already sorted: the middle one, or the mean of the two."""
    half = values.size // 2
    if values.size % 2:
        return values[half]
    return (values[half - 1] + values[half]) / 2


def robust_scale(resid: np.ndarray, n_params: int, floor: float) -> float:
    """Noise scale of fit residuals, corrected for the fitted parameters, at least `floor`."""
    n = resid.size
    if n <= n_params:
        return floor
    return max(robust_sd(resid) * math.sqrt(n / (n - n_params)), floor)


def aicc(loss: float, n_params: int, n_points: float) -> float:
    """AICc from a loss in units of sigma² (-log-likelihood up to a constant).

    Where there are too few points for the small-sample correction, the correction is taken
    at n - k - 1 = 1, which still charges each extra parameter heavily.
    """
    k = n_params
    return 2 * k + 2 * loss + 2 * k * (k + 1) / max(n_points - k - 1, 1.0)


@dataclass
class _Fit:
    family: _Family
    theta: np.ndarray  # (m,)
    c: np.ndarray  # (m,)
    a: np.ndarray  # (m,)
    cov: np.ndarray  # (m, 2, 2) covariance of (c, A) per unit sigma²
    loss: np.ndarray  # (m,) Huber loss on the readings, in units of sigma²
    resid_best: np.ndarray


def _fit_family(
    family: _Family, u: np.ndarray, y: np.ndarray, w: np.ndarray, sigma: float, iters: int = 5
) -> _Fit:
    return _fit_families((family,), _bases((family,), u), y, w, sigma, iters)[0]


def _bases(families: tuple[_Family, ...], u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The shapes' basis values stacked (one row per grid value, finite: 0 where not) and
    which rows are not finite everywhere; they depend on the ages only, not on sigma."""
    phi = np.concatenate([_phi(f, _grid(f), u) for f in families])
    bad = ~np.isfinite(phi).all(axis=1)
    return np.where(np.isfinite(phi), phi, 0.0), bad


def _fit_families(
    families: tuple[_Family, ...],
    bases: tuple[np.ndarray, np.ndarray],
    y: np.ndarray,
    w: np.ndarray,
    sigma: float,
    iters: int = 5,
) -> tuple[_Fit, ...]:
    """`_fit_family` of each shape, their grids stacked into one array: every row is fitted on
    its own (sums along the row only), so each number is the one a shape alone would get."""
    phi, bad = bases
    rw = None
    for i in range(iters):
        ww = w * rw if rw is not None else w * np.ones_like(phi)
        wphi = ww * phi
        s0 = ww.sum(1)
        s1 = wphi.sum(1)
        s11 = (wphi * phi).sum(1)
        sy = (ww * y).sum(1)
        s1y = (wphi * y).sum(1)
        det = s0 * s11 - s1 * s1
        det = np.where(np.abs(det) > 1e-300, det, np.nan)
        a = (s0 * s1y - s1 * sy) / det
        c = (sy - a * s1) / s0
        r = y - c[:, None] - a[:, None] * phi
        if i < iters - 1:  # the weights of the last pass would not be used
            z = np.abs(r) / (HUBER_K * sigma)
            rw = np.where(z <= 1.0, 1.0, 1.0 / np.maximum(z, 1e-300))
    cov = np.empty((phi.shape[0], 2, 2))
    cov[:, 0, 0] = s11 / det
    cov[:, 1, 1] = s0 / det
    cov[:, 0, 1] = cov[:, 1, 0] = -s1 / det
    loss = (w * huber_rho(r / sigma)).sum(1)
    loss = np.where(bad | ~np.isfinite(loss), np.inf, loss)
    out = []
    start = 0
    for family in families:
        theta = _grid(family)
        rows = slice(start, start + theta.size)
        best = int(np.argmin(loss[rows]))
        out.append(_Fit(family, theta, c[rows], a[rows], cov[rows], loss[rows], r[start + best]))
        start += theta.size
    return tuple(out)


@dataclass(frozen=True)
class TrendFit:
    """Growth fits to one element's readings, pooled over candidate shapes."""

    t_scale_h: float
    sigma_bar: float
    n_points: float
    fits: tuple[_Fit, ...]
    aicc: tuple[float, ...]
    model_weights: tuple[float, ...]
    # The shapes weighed by plain AIC, without AICc's small-sample charge: with 8 readings that
    # charge made a straight line win over readings that clearly bend up (see open_weights).
    open_weights: tuple[float, ...] = ()

    @property
    def best(self) -> _Fit:
        return self.fits[int(np.argmax(self.model_weights))]

    def describe(self) -> str:
        """The leading shape, and the runner-up where it carries real weight."""
        order = np.argsort(self.model_weights)[::-1]
        first, second = self.fits[order[0]].family.name, self.fits[order[1]].family.name
        w1, w2 = self.model_weights[order[0]], self.model_weights[order[1]]
        if w2 >= 0.2:
            return f"{first} ({w1:.0%}), {second} ({w2:.0%})"
        return first

    def dp_at(self, ages_h: np.ndarray) -> np.ndarray:
        """The best shape at its best parameter, evaluated at element ages."""
        fit = self.best
        i = int(np.argmin(fit.loss))
        u = np.asarray(ages_h, dtype=float) / self.t_scale_h
        phi = _phi(fit.family, fit.theta[i : i + 1], u)[0]
        return fit.c[i] + fit.a[i] * phi

    def _draws(self, model_weights: tuple[float, ...] | None = None):
        """Per shape: (fit, theta, c draws, A draws, weights), coefficient draws per theta row;
        the shapes weighed by `model_weights` (default: the AICc weights)."""
        dof = max(self.n_points - 2.0, 1.0)
        # The chi-square quantiles, as scipy.stats.chi2.ppf works them out (2 x the inverse
        # regularised lower gamma at dof / 2): scipy.special loads in a third of the time.
        sig_draw = self.sigma_bar * np.sqrt(dof / (2 * special.gammaincinv(dof / 2, _U)))
        shape_weights = self.model_weights if model_weights is None else model_weights
        for fit, mw in zip(self.fits, shape_weights, strict=True):
            if mw < 1e-4:
                continue
            tw = np.exp(-(fit.loss - np.min(fit.loss)))
            tw = tw / tw.sum()
            keep = tw > 1e-4 / tw.size
            th, c, a, cov = fit.theta[keep], fit.c[keep], fit.a[keep], fit.cov[keep]
            # Cholesky of each 2x2 covariance, applied to fixed normal draws.
            l00 = np.sqrt(np.clip(cov[:, 0, 0], 0.0, None))
            l10 = np.divide(cov[:, 1, 0], l00, out=np.zeros_like(l00), where=l00 > 0)
            l11 = np.sqrt(np.clip(cov[:, 1, 1] - l10**2, 0.0, None))
            sd = sig_draw[None, :]
            cd = c[:, None] + sd * l00[:, None] * _Z[None, :, 0]
            ad = a[:, None] + sd * (l10[:, None] * _Z[None, :, 0] + l11[:, None] * _Z[None, :, 1])
            yield fit, th, cd, ad, np.repeat(mw * tw[keep] / _N_DRAWS, _N_DRAWS)

    def crossings(
        self, levels_bar: tuple[float, ...], model_weights: tuple[float, ...] | None = None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Crossing ages (one row per level) and weights of a cloud of plausible curves, the
        shapes weighed by `model_weights` (default: the AICc weights; `open_weights` for the
        pessimistic side, see store.forecast.trend.forecast).

        Ages are np.inf where a drawn curve never reaches the level.
        """
        ages, weights = [], []
        for fit, th, cd, ad, wt in self._draws(model_weights):
            rows = []
            for level in levels_bar:
                with np.errstate(divide="ignore", invalid="ignore"):
                    phi_star = (level - cd) / ad
                u = _phi_inverse(fit.family, th[:, None], phi_star)
                u = np.where((ad > 0) & np.isfinite(u), u, np.inf)
                u = np.where(cd >= level, 0.0, u)
                rows.append((u * self.t_scale_h).ravel())
            ages.append(np.array(rows))
            weights.append(wt)
        return np.concatenate(ages, axis=1), np.concatenate(weights)

    def values_at(self, age_h: float) -> tuple[np.ndarray, np.ndarray]:
        """ΔP of the same cloud of curves at one age, with weights (curve spread only)."""
        vals, weights = [], []
        for fit, th, cd, ad, wt in self._draws():
            phi = _phi(fit.family, th, np.array([age_h / self.t_scale_h]))  # (m, 1)
            vals.append((cd + ad * phi).ravel())
            weights.append(wt)
        v, w = np.concatenate(vals), np.concatenate(weights)
        ok = np.isfinite(v)
        return v[ok], w[ok]


def fit_trend(
    ages_h: np.ndarray,
    dp_bar: np.ndarray,
    weights: np.ndarray,
    clean_bar: float | None,
    sigma_floor_bar: float,
) -> TrendFit:
    """Fit every candidate shape to readings (ages sorted, unique, the last one > 0)."""
    t = np.asarray(ages_h, dtype=float)
    y = np.asarray(dp_bar, dtype=float)
    w = np.asarray(weights, dtype=float)
    if clean_bar is not None:
        # The clean-element ΔP counts as one reading at age 0: it anchors the start of the curve.
        t, y, w = np.r_[0.0, t], np.r_[clean_bar, y], np.r_[1.0, w]
    scale = float(t[-1])
    u = t / scale
    # First pass with a scale from a straight line, second with the scale of the best shape.
    bases = _bases(FAMILIES, u)  # the line's row first
    line_bases = (bases[0][:1], bases[1][:1])
    line = _fit_families((LINE,), line_bases, y, w, max(float(np.std(y)), sigma_floor_bar))[0]
    sigma = robust_scale(line.resid_best, 2, sigma_floor_bar)
    for _ in range(2):
        fits = _fit_families(FAMILIES, bases, y, w, sigma)
        best = min(fits, key=lambda f: float(np.min(f.loss)))
        sigma_new = robust_scale(best.resid_best, best.family.n_params - 1, sigma_floor_bar)
        if abs(sigma_new - sigma) < 0.05 * sigma:
            break
        sigma = sigma_new
    else:
        fits = _fit_families(FAMILIES, bases, y, w, sigma)
    n = float(w.sum())
    a = np.array([aicc(float(np.min(f.loss)), f.family.n_params, n) for f in fits])
    mw = np.exp(-0.5 * (a - a.min()))
    mw = mw / mw.sum()
    plain = np.array([2 * f.family.n_params + 2 * float(np.min(f.loss)) for f in fits])
    ow = np.exp(-0.5 * (plain - plain.min()))
    return TrendFit(
        t_scale_h=scale,
        sigma_bar=sigma,
        n_points=n,
        fits=fits,
        aicc=tuple(float(x) for x in a),
        model_weights=tuple(float(x) for x in mw),
        open_weights=tuple(float(x) for x in ow / ow.sum()),
    )
