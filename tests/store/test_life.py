"""Weibull service life with right-censoring (store/forecast/life.py)."""

import math

import numpy as np
import pytest
from scipy import stats

from store.base.errors import BookError
from store.forecast.life import WeibullFit, fit_weibull

# REFERENCES.md §8a: the `reliability` docs' MLE example (3 failures, 2 suspensions).
SMALL_FAILED = [17, 5, 12]
SMALL_CENSORED = [20, 25]

# REFERENCES.md §8a: shock absorber data (Meeker & Escobar 1998), 11 failures, 27 suspensions, km.
SHOCK_FAILED = [6700, 9120, 12200, 13150, 14300, 17520, 20100, 20900, 22700, 26510, 27490]
SHOCK_CENSORED = [
    6950, 7820, 8790, 9660, 9820, 11310, 11690, 11850, 11880, 12140, 12870, 13330, 13470,
    14040, 17540, 17890, 18450, 18960, 18980, 19410, 20100, 20150, 20320, 23490, 27410,
    27890, 28100,
]  # fmt: skip


def test_small_documented_example():
    fit = fit_weibull(SMALL_FAILED, SMALL_CENSORED)
    # REFERENCES.md §8a: beta 1.57474, eta 23.0653, log-likelihood -12.4823 (tolerance 1e-5)
    assert fit.shape == pytest.approx(1.57474, rel=1e-5)
    assert fit.scale_h == pytest.approx(23.0653, rel=1e-5)
    assert fit.log_likelihood == pytest.approx(-12.4823, abs=1e-4)
    assert (fit.n_failed, fit.n_censored) == (3, 2)


def test_shock_absorber_data():
    fit = fit_weibull(SHOCK_FAILED, SHOCK_CENSORED)
    # REFERENCES.md §8a: beta 3.1605, eta 27 719 km, log-likelihood -123.9954 (tolerance 1e-3)
    assert fit.shape == pytest.approx(3.1605, rel=1e-3)
    assert fit.scale_h == pytest.approx(27719, rel=1e-3)
    assert fit.log_likelihood == pytest.approx(-123.9954, abs=1e-3)


def test_agrees_with_scipy_censored_fit():
    # Cross-check with scipy's own censored MLE on simulated lives (beta 2.2, eta 800 h),
    # each element taken out at a random planned-change age (right-censoring).
    rng = np.random.default_rng(11)
    life = 800 * rng.weibull(2.2, 40)
    planned = rng.uniform(300, 1500, 40)
    failed, censored = life[life <= planned], planned[life > planned]
    ours = fit_weibull(failed, censored)
    data = stats.CensoredData(uncensored=failed, right=censored)
    c, _, scale = stats.weibull_min.fit(data, floc=0)
    assert ours.shape == pytest.approx(c, rel=1e-3)
    assert ours.scale_h == pytest.approx(scale, rel=1e-3)
    # The same log-likelihood as scipy's density and survival at our estimate.
    ll = stats.weibull_min.logpdf(failed, ours.shape, scale=ours.scale_h).sum()
    ll += stats.weibull_min.logsf(censored, ours.shape, scale=ours.scale_h).sum()
    assert ours.log_likelihood == pytest.approx(ll, rel=1e-9)


def test_quantiles_match_scipy():
    fit = WeibullFit(shape=2.5, scale_h=1200.0, n_failed=5, n_censored=0, log_likelihood=0.0)
    dist = stats.weibull_min(2.5, scale=1200.0)  # reference library cross-check
    assert fit.age_at_fraction_h(0.10) == pytest.approx(dist.ppf(0.10), rel=1e-12)
    assert fit.fraction_by(900.0) == pytest.approx(dist.cdf(900.0), rel=1e-12)
    # Conditional on surviving to 900 h: F(900 + r) = F(900) + p * S(900).
    p = 0.5
    expected = dist.ppf(dist.cdf(900.0) + p * dist.sf(900.0)) - 900.0
    assert fit.remaining_quantile_h(900.0, p) == pytest.approx(expected, rel=1e-9)
    # At age 0 the remaining quantile is the plain quantile.
    assert fit.remaining_quantile_h(0.0, 0.1) == pytest.approx(dist.ppf(0.1), rel=1e-12)


def test_b10_of_documented_example():
    fit = fit_weibull(SMALL_FAILED, SMALL_CENSORED)
    # B10 = eta * (-ln 0.9) ** (1 / beta) with the REFERENCES.md §8a beta and eta
    assert fit.age_at_fraction_h(0.10) == pytest.approx(
        23.0653 * (-math.log(0.9)) ** (1 / 1.57474), rel=1e-4
    )


def test_fewer_than_two_failures_gives_none():
    assert fit_weibull([500.0], [300.0, 900.0]) is None
    assert fit_weibull([], [300.0]) is None


def test_equal_lives_do_not_crash():
    # Lives logged to the day can be identical; the shape is then capped, not infinite.
    fit = fit_weibull([720.0, 720.0, 720.0])
    assert fit is not None
    assert fit.age_at_fraction_h(0.5) == pytest.approx(720.0, rel=0.02)


def test_bad_input():
    with pytest.raises(BookError):
        fit_weibull([100.0, -5.0])
    with pytest.raises(BookError):
        fit_weibull([100.0, 200.0], [0.0])
    fit = fit_weibull(SMALL_FAILED, SMALL_CENSORED)
    with pytest.raises(BookError):
        fit.age_at_fraction_h(1.0)
