"""Bootstrap pieces of the attenuation interval against scipy.stats.bootstrap.

Sources: percentile and bias-corrected accelerated (BCa) intervals, Efron, J Am Stat Assoc
82:171-185, 1987, and Efron & Tibshirani, An Introduction to the Bootstrap, 1993; the
reference implementation is scipy.stats.bootstrap (reference library). Resampling blocks
(tiles, runs of slices) rather than single values: Künsch, Ann Stat 17:1217-1241, 1989.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from viewer_plugin.kernels.primitives.bootstrap import (
    bca_interval,
    block_counts,
    bootstrap_interval,
    jackknife_counts,
    percentile_interval,
    resample_counts,
)
from viewer_plugin.kernels.primitives.foreground import tile_index

B = 20_000


@pytest.fixture(scope="module")
def skewed():
    # an exponential sample: the mean's bootstrap distribution is skewed, so BCa and the
    # percentile interval differ (Efron & Tibshirani 1993, ch. 14)
    return np.random.default_rng(3).exponential(2.0, size=25)


def _ours(data, method):
    rng = np.random.default_rng(11)
    n = data.size
    replicates = resample_counts(rng, n, B) @ data / n
    if method == "percentile":
        return percentile_interval(replicates)
    return bca_interval(data.mean(), replicates, jackknife_counts(n) @ data / (n - 1))


@pytest.mark.parametrize("method", ["percentile", "BCa"])
def test_intervals_match_scipy_bootstrap(skewed, method):
    ref = stats.bootstrap((skewed,), np.mean, n_resamples=B, method=method,
                          random_state=np.random.default_rng(5)).confidence_interval
    low, high = _ours(skewed, method)
    width = ref.high - ref.low
    # two independent sets of 20 000 resamples: the limits agree within Monte Carlo error
    assert low == pytest.approx(ref.low, abs=0.03 * width)
    assert high == pytest.approx(ref.high, abs=0.03 * width)


def test_bca_shifts_like_scipy(skewed):
    # for a right-skewed statistic both BCa intervals lie to the right of the percentile ones
    ours_p, ours_b = _ours(skewed, "percentile"), _ours(skewed, "BCa")
    assert ours_b[0] > ours_p[0] and ours_b[1] > ours_p[1]
    result = bootstrap_interval(skewed.mean(), resample_counts(np.random.default_rng(1), 25, 4000)
                                @ skewed / 25, jackknife_counts(25) @ skewed / 24)
    assert result.method == "BCa" and result.low < skewed.mean() < result.high


def test_percentile_interval_is_numpy_quantile():
    values = np.random.default_rng(0).normal(size=999)
    low, high = percentile_interval(np.append(values, np.nan), 0.9)
    assert (low, high) == pytest.approx(tuple(np.quantile(values, [0.05, 0.95])), rel=1e-12)  # numpy


def test_block_counts_keep_runs_and_sum_to_n():
    # moving-block bootstrap (Künsch 1989): each resample covers runs of `length` positions;
    # over many resamples interior positions are drawn equally often
    rng = np.random.default_rng(4)
    counts = block_counts(rng, 30, 5, 4000)
    assert np.allclose(counts.sum(axis=1), 30)
    raw = counts / counts.sum(axis=1, keepdims=True) * 30
    interior = raw[:, 5:25].mean(axis=0)
    assert np.ptp(interior) < 0.1 * interior.mean()
    one = block_counts(np.random.default_rng(9), 12, 4, 1)[0]
    assert np.all(np.diff(np.flatnonzero(one > 0)) >= 1)


def test_tiles_cover_the_field_once():
    tiles, n = tile_index((50, 37))
    assert n == 16 and tiles.size == 50 * 37
    assert np.bincount(tiles).min() > 0
