"""Straight-line fits (primitives/fitting.py) against scipy and numpy.

References: scipy.stats.linregress (slope, intercept, standard error, r); numpy.polyfit with
weights and its scaled covariance (weighted least squares); numpy.linalg.lstsq (fit through
the origin); scipy.stats.t.interval (Student-t interval) -- all reference libraries. The
uncentred r² of a fit through the origin, 1 - rss / sum(y**2): regression textbooks (from
memory). Coverage of a 95 % interval: Binomial(n, 0.95) (scipy.stats.binom).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from viewer_plugin.kernels.primitives.fitting import (
    POOR_FIT,
    decay_length,
    decay_length_interval,
    fit_line,
    fit_log_profile,
    fit_through_origin,
    r_squared,
    t_interval,
)


@pytest.mark.parametrize("seed", range(10))
def test_unweighted_line_equals_linregress(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 60))
    x = rng.uniform(0, 100, n)
    y = 3.0 - 0.2 * x + rng.normal(0, 2.0, n)
    fit = fit_line(x, y)
    ref = stats.linregress(x, y)
    assert fit.slope == pytest.approx(ref.slope, rel=1e-10)
    assert fit.intercept == pytest.approx(ref.intercept, rel=1e-10, abs=1e-12)
    assert fit.slope_se == pytest.approx(ref.stderr, rel=1e-8)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-10)
    assert fit.dof == n - 2 and fit.n == n


@pytest.mark.parametrize("seed", range(10))
def test_weighted_line_equals_polyfit(seed):
    """numpy.polyfit minimises sum((w_i r_i)**2), so its w is the square root of our weights;
    its covariance is scaled by rss / (n - 2) like ours."""
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(6, 50))
    x = np.sort(rng.uniform(0, 50, n))
    sd = rng.uniform(0.5, 3.0, n)
    y = 1.0 + 0.7 * x + rng.normal(0, sd)
    weights = 1.0 / sd**2
    fit = fit_line(x, y, weights)
    (slope, intercept), cov = np.polyfit(x, y, 1, w=np.sqrt(weights), cov=True)
    assert fit.slope == pytest.approx(slope, rel=1e-9)
    assert fit.intercept == pytest.approx(intercept, rel=1e-9)
    assert fit.slope_se == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-7)
    # weighted centred r², written out
    resid = y - intercept - slope * x
    ybar = np.average(y, weights=weights)
    expected = 1 - np.sum(weights * resid**2) / np.sum(weights * (y - ybar) ** 2)
    assert fit.r_squared == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("seed", range(10))
def test_through_origin_equals_lstsq_with_uncentred_r_squared(seed):
    rng = np.random.default_rng(200 + seed)
    n = int(rng.integers(4, 40))
    x = rng.uniform(1, 60, n)
    y = -0.01 * x + rng.normal(0, 0.05, n)
    fit = fit_through_origin(x, y)
    (slope,), rss, *_ = np.linalg.lstsq(x[:, None], y, rcond=None)
    assert fit.slope == pytest.approx(slope, rel=1e-10)
    assert fit.intercept == 0.0 and fit.dof == n - 1
    assert fit.slope_se == pytest.approx(math.sqrt(rss[0] / (n - 1) / np.sum(x**2)), rel=1e-8)
    # uncentred: 1 - rss / sum(y**2) (regression textbooks, from memory)
    assert fit.r_squared == pytest.approx(1 - rss[0] / np.sum(y**2), rel=1e-9)
    assert fit.r_squared == pytest.approx(r_squared(y, rss[0], centred=False), rel=1e-12)


def test_uncentred_r_squared_differs_from_centred_where_it_should():
    """y = 2x exactly: both are 1. A flat y far from 0 fitted through the origin: the centred
    form is undefined (no variation), the uncentred one measures the fit against y = 0."""
    x = np.arange(1.0, 6.0)
    assert fit_through_origin(x, 2 * x).r_squared == pytest.approx(1.0)
    flat = np.full(5, 3.0)
    fit = fit_through_origin(x, flat)
    assert math.isnan(r_squared(flat, 1.0))
    assert 0 < fit.r_squared < 1


@pytest.mark.parametrize("dof, level", [(1, 0.95), (7, 0.95), (30, 0.9)])
def test_t_interval_equals_scipy(dof, level):
    low, high = t_interval(2.5, 0.3, dof, level)
    ref = stats.t.interval(level, dof, loc=2.5, scale=0.3)
    assert (low, high) == pytest.approx(ref, rel=1e-12)
    assert t_interval(1.0, 0.1, 0) == (-math.inf, math.inf)
    assert t_interval(math.nan, 0.1, 5) == (-math.inf, math.inf)


def test_slope_interval_covers_the_truth_95_percent_of_the_time():
    """400 random lines with known slope: the count of 95 % intervals holding the truth is
    Binomial(400, 0.95); 365..394 holds it with probability > 0.999 (scipy.stats.binom)."""
    rng = np.random.default_rng(7)
    covered = 0
    for _ in range(400):
        x = rng.uniform(0, 10, 12)
        y = 5.0 + 1.5 * x + rng.normal(0, 1.0, 12)
        low, high = fit_line(x, y).slope_interval()
        covered += low <= 1.5 <= high
    assert stats.binom.cdf(364, 400, 0.95) < 1e-3 and stats.binom.sf(394, 400, 0.95) < 1e-3
    assert 365 <= covered <= 394


def test_log_profile_fit_recovers_a_beer_lambert_length():
    """Beer-Lambert, s(z) = S exp(-z / l) (textbook physics): the log fit returns l exactly on
    noise-free data and NaN-free weights leave out unusable slices."""
    z = np.arange(30) * 2.0
    signal = 500 * np.exp(-z / 60.0)
    sem = 0.01 * signal
    signal[5] = np.nan
    signal[6] = -1.0
    fit = fit_log_profile(z, signal, sem)
    assert fit.n == 28
    assert decay_length(fit.slope) == pytest.approx(60.0, rel=1e-10)
    assert math.exp(fit.intercept) == pytest.approx(500.0, rel=1e-10)


def test_decay_lengths_of_slopes():
    assert decay_length(-0.05) == pytest.approx(20.0)
    assert decay_length(0.0) == math.inf and decay_length(math.nan) == math.inf
    assert decay_length(-math.inf) == 0.0
    assert decay_length_interval((-math.inf, math.inf)) == (0.0, math.inf)
    assert decay_length_interval((-0.05, -0.04)) == pytest.approx((20.0, 25.0))


def test_degenerate_fits_are_nan_not_errors():
    assert math.isnan(fit_line([1.0, 1.0, 1.0], [1.0, 2.0, 3.0]).slope)
    assert math.isnan(fit_line([1.0], [2.0]).slope)
    assert math.isnan(fit_through_origin([0.0, 0.0], [1.0, 2.0]).slope)
    assert fit_line([0.0, 1.0], [0.0, 1.0]).slope_se == math.inf       # no degree of freedom left
    assert 0.5 < POOR_FIT < 1.0
