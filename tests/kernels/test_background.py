"""Sigma-clipped background levels (primitives/background.py) against known offsets and scipy.

References: the mean of Poisson(mu) counts is mu (textbook statistics); scipy.stats.sigmaclip
(reference library) for the clipping iteration; numpy's median, mean and std (reference
library) for the start and the clipped statistics; the normalised MAD, 1.4826 * MAD, estimates
the standard deviation of a normal distribution (textbook statistics, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import sigmaclip

from viewer_plugin.kernels import ParameterError, background_level, slice_background
from viewer_plugin.kernels.primitives.background import (
    clipped_rows,
    clipped_stats,
    frames_background,
)


def poisson_background(mu=3.0, offset=100.0, shape=(6, 128, 128), seed=0):
    rng = np.random.default_rng(seed)
    data = offset + 5.0 * rng.poisson(mu, size=shape)      # 5 counts per photon
    data[:, 40:44, :] += 800.0                              # bright structure, ~3 % of voxels
    return data


def sigmaclip_from_median(values, n_sigma=3.0):
    """The definition, written with numpy and scipy only: one clip at n_sigma normalised MADs
    around the median, then scipy.stats.sigmaclip of what is left."""
    values = values[np.isfinite(values)]
    center = np.median(values)
    spread = 1.4826 * np.median(np.abs(values - center))
    start = values[(values >= center - n_sigma * spread) & (values <= center + n_sigma * spread)]
    kept = sigmaclip(start, n_sigma, n_sigma).clipped
    return kept.mean(), kept.std(), kept.size / values.size


def rows_with_structure(seed, n_rows=6, n_values=3000, share=0.03):
    """Gaussian background N(10, 2) with a bright share of each row at +60."""
    rng = np.random.default_rng(seed)
    rows = rng.normal(10.0, 2.0, size=(n_rows, n_values))
    rows[:, : int(share * n_values)] += 60.0
    return rows


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


@pytest.mark.parametrize("seed", range(8))
def test_clipping_is_scipy_sigmaclip_from_a_median_start(seed):
    """scipy.stats.sigmaclip (reference library) does the iteration: same kept set, same stats;
    the compiled row-wise form gives the same numbers."""
    rows = rows_with_structure(seed)
    rows[2, ::7] = np.nan
    level, sigma, fraction = clipped_rows(rows)
    for i, row in enumerate(rows):
        ref_level, ref_sigma, ref_fraction = sigmaclip_from_median(row)
        scalar = clipped_stats(row)
        assert scalar.level == pytest.approx(ref_level, rel=1e-12)
        assert scalar.sigma == pytest.approx(ref_sigma, rel=1e-12)
        assert scalar.fraction == ref_fraction
        assert level[i] == pytest.approx(ref_level, rel=1e-9)
        assert sigma[i] == pytest.approx(ref_sigma, rel=1e-9)
        assert fraction[i] == ref_fraction


@pytest.mark.parametrize("seed", range(8))
def test_sparse_structure_agrees_with_plain_sigmaclip_and_the_truth(seed):
    """With 3 % structure, sigmaclip started from the mean and standard deviation of all values
    (scipy.stats.sigmaclip alone) finds the same background within a tenth of its standard
    error, and both find the true mean 10 of N(10, 2) within 4 standard errors."""
    row = rows_with_structure(seed, n_rows=1)[0]
    plain = sigmaclip(row, 3.0, 3.0).clipped
    ours = clipped_stats(row)
    standard_error = 2.0 / np.sqrt(row.size)
    assert abs(ours.level - plain.mean()) < 0.1 * standard_error
    # 3-sigma clipping removes the tails of the normal background: its mean stays unbiased
    assert ours.level == pytest.approx(10.0, abs=4 * standard_error)


@pytest.mark.parametrize("seed", range(5))
def test_dense_structure_needs_the_median_start(seed):
    """Why the clipping starts from the median and MAD: with 40 % of the voxels bright, the
    mean and standard deviation of all values put the clip beyond the structure, so plain
    scipy.stats.sigmaclip keeps everything and reports the mixture's mean; the median start
    finds the true background N(10, 2)."""
    row = rows_with_structure(seed, n_rows=1, share=0.4)[0]
    plain = sigmaclip(row, 3.0, 3.0).clipped
    assert plain.mean() > 25.0                              # structure and background mixed
    ours = clipped_stats(row)
    assert ours.level == pytest.approx(10.0, abs=0.2)
    assert ours.sigma == pytest.approx(2.0, rel=0.1)
    assert ours.fraction == pytest.approx(0.6, abs=0.01)


def test_clipped_rows_matches_the_scalar_clipping():
    rng = np.random.default_rng(1)
    rows = rng.normal(10.0, 2.0, size=(5, 3000))
    rows[:, :100] += 60.0
    rows[2, ::7] = np.nan
    level, sigma, fraction = clipped_rows(rows)
    for i in range(5):
        ref = clipped_stats(rows[i], n_sigma=3.0)
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
    # integer input and a row with more than half its values equal (MAD 0)
    level, sigma, fraction = clipped_rows(np.array([[7, 7, 7, 9, 100]], dtype=np.uint16))
    assert level[0] == 7.0 and sigma[0] == 0.0 and fraction[0] == 0.6
    assert clipped_stats(np.array([7, 7, 7, 9, 100])).fraction == 0.6


def test_frames_background_samples_frames_and_matches_the_whole():
    data = poisson_background(shape=(40, 64, 64), seed=3)
    sampled = frames_background(data)
    whole = background_level(data)
    assert sampled.level == pytest.approx(whole.level, abs=0.5)
    assert sampled.level == pytest.approx(115.0, abs=1.0)     # textbook Poisson mean


def test_background_bad_input():
    with pytest.raises(ParameterError, match="^n_sigma: expected"):
        background_level(np.zeros((4, 4)), n_sigma=0)
    with pytest.raises(ParameterError, match="^step: expected"):
        background_level(np.zeros((4, 4)), step=0)
