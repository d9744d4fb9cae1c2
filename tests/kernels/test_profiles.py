"""Background levels (profiles.py) against known offsets and numpy.

References: the mean of Poisson(mu) counts is mu (textbook statistics); numpy's mean, median
and std (reference library) for the clipped statistics.
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin.kernels import ParameterError, background_level, slice_background
from viewer_plugin.kernels.primitives.background import _clipped_stats, clipped_rows


def poisson_background(mu=3.0, offset=100.0, shape=(6, 128, 128), seed=0):
    rng = np.random.default_rng(seed)
    data = offset + 5.0 * rng.poisson(mu, size=shape)      # 5 counts per photon
    data[:, 40:44, :] += 800.0                              # bright structure, ~3 % of voxels
    return data


def test_background_level_is_unbiased_by_shot_noise():
    # the background is offset + 5 * Poisson(3): mean 115 (textbook Poisson mean);
    # a low percentile would sit far below it
    data = poisson_background()
    level = background_level(data, step=1).level
    assert level == pytest.approx(115.0, abs=1.0)
    assert np.percentile(data, 5) < 106


def test_slice_background_follows_each_slice():
    data = poisson_background()
    data[3] += 50.0
    levels = slice_background(data)
    assert levels.dtype == np.float64 and levels.shape == (6,)
    assert levels[3] - np.delete(levels, 3).mean() == pytest.approx(50.0, abs=2.0)


def test_clipped_rows_matches_the_scalar_clipping():
    rng = np.random.default_rng(1)
    rows = rng.normal(10.0, 2.0, size=(5, 3000))
    rows[:, :100] += 60.0
    rows[2, ::7] = np.nan
    level, sigma, fraction = clipped_rows(rows)
    for i in range(5):
        ref = _clipped_stats(rows[i], n_sigma=3.0)
        assert level[i] == pytest.approx(ref.level, rel=1e-9)
        assert sigma[i] == pytest.approx(ref.sigma, rel=1e-9)
        assert fraction[i] == pytest.approx(ref.fraction, rel=1e-9)
    # kept values: numpy mean/std of the values within 3 sigma of the result
    row = rows[0]
    kept = row[np.abs(row - level[0]) <= 3 * sigma[0]]
    assert level[0] == pytest.approx(np.mean(kept), rel=1e-3)
    assert level[0] == pytest.approx(10.0, abs=0.15)


def test_clipped_rows_edge_cases():
    level, sigma, fraction = clipped_rows(np.array([[np.nan, np.nan], [4.0, 4.0]]))
    assert np.isnan(level[0]) and fraction[0] == 0.0
    assert level[1] == 4.0 and sigma[1] == 0.0 and fraction[1] == 1.0


def test_background_bad_input():
    with pytest.raises(ParameterError, match="^n_sigma: expected"):
        background_level(np.zeros((4, 4)), n_sigma=0)
    with pytest.raises(ParameterError, match="^step: expected"):
        background_level(np.zeros((4, 4)), step=0)
