"""Service life of filter elements: a two-parameter Weibull fitted by maximum likelihood.

Elements that reached the change limit are failures; elements taken out earlier (planned
change, repair, wrong part) are right-censored: they only tell us the life was longer.

F(t) = 1 - exp(-(t / scale) ** shape), ages in hours.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from store.base.errors import BookError

# Lives that are all equal make the likelihood climb forever with the shape; stop there.
SHAPE_MAX = 50.0
SHAPE_MIN = 0.05


@dataclass(frozen=True)
class WeibullFit:
    """A fitted life distribution; ages in hours."""

    shape: float
    scale_h: float
    n_failed: int
    n_censored: int
    log_likelihood: float

    def fraction_by(self, age_h: float) -> float:
        """Share of elements expected to have reached the limit by this age."""
        if age_h <= 0:
            return 0.0
        return -math.expm1(-((age_h / self.scale_h) ** self.shape))

    def age_at_fraction_h(self, p: float) -> float:
        """Age by which a share p of elements reach the limit (p = 0.10 gives B10)."""
        _check_p(p)
        return self.scale_h * (-math.log1p(-p)) ** (1.0 / self.shape)

    def remaining_quantile_h(self, age_h: float, p: float) -> float:
        """Hours beyond age_h by which a share p of elements that survived to age_h fail."""
        _check_p(p)
        z = (max(age_h, 0.0) / self.scale_h) ** self.shape
        return self.scale_h * (z - math.log1p(-p)) ** (1.0 / self.shape) - max(age_h, 0.0)

    def survival(self, age_h: np.ndarray) -> np.ndarray:
        """S(t) for an array of ages."""
        t = np.clip(np.asarray(age_h, dtype=float), 0.0, None)
        return np.exp(-((t / self.scale_h) ** self.shape))

    def log_pdf(self, age_h: np.ndarray) -> np.ndarray:
        """log f(t) for an array of ages (-inf at t <= 0 or infinite t)."""
        t = np.asarray(age_h, dtype=float)
        out = np.full(t.shape, -np.inf)
        ok = np.isfinite(t) & (t > 0)
        z = t[ok] / self.scale_h
        out[ok] = (
            math.log(self.shape / self.scale_h) + (self.shape - 1.0) * np.log(z) - z**self.shape
        )
        return out


def _check_p(p: float) -> None:
    if not 0.0 < p < 1.0:
        raise BookError(f"a fraction must lie between 0 and 1, not {p}")


def _clean(values: Sequence[float], what: str) -> np.ndarray:
    arr = np.asarray(list(values), dtype=float)
    if arr.size and (not np.all(np.isfinite(arr)) or np.any(arr <= 0)):
        raise BookError(f"{what} must be positive numbers of hours")
    return arr


def fit_weibull(failed_h: Sequence[float], censored_h: Sequence[float] = ()) -> WeibullFit | None:
    """Maximum-likelihood Weibull of service lives with right-censoring.

    Returns None with fewer than two failures (no shape can be told from one life).
    """
    x = _clean(failed_h, "service lives")
    c = _clean(censored_h, "censored lives")
    r = x.size
    if r < 2:
        return None
    # Work on times scaled by their largest value so t ** shape stays finite.
    unit = float(max(x.max(), c.max() if c.size else 0.0))
    xs, ts = x / unit, np.concatenate([x, c]) / unit
    log_x_mean = float(np.log(xs).mean())
    log_t = np.log(ts)

    def score(shape: float) -> float:
        # d(profile log-likelihood)/d(shape) up to a factor; rises with the shape.
        tb = ts**shape
        return float((tb * log_t).sum() / tb.sum()) - 1.0 / shape - log_x_mean

    if score(SHAPE_MAX) <= 0.0:
        shape = SHAPE_MAX
    elif score(SHAPE_MIN) >= 0.0:
        shape = SHAPE_MIN
    else:
        shape = brentq(score, SHAPE_MIN, SHAPE_MAX, xtol=1e-12, rtol=1e-12)
    scale_s = float((ts**shape).sum() / r) ** (1.0 / shape)
    scale_h = scale_s * unit
    return WeibullFit(
        shape=float(shape),
        scale_h=scale_h,
        n_failed=int(r),
        n_censored=int(c.size),
        log_likelihood=_log_likelihood(x, c, float(shape), scale_h),
    )


def _log_likelihood(x: np.ndarray, c: np.ndarray, shape: float, scale_h: float) -> float:
    zx = x / scale_h
    ll = np.sum(math.log(shape / scale_h) + (shape - 1.0) * np.log(zx) - zx**shape)
    ll -= np.sum((c / scale_h) ** shape)
    return float(ll)
