"""Histogram specification and Otsu's threshold (primitives/matching.py, threshold.py).

References (reference libraries): skimage.exposure.match_histograms for histogram
specification (Gonzalez & Woods, Digital Image Processing, ch. 3, from memory);
skimage.filters.threshold_otsu for Otsu's threshold (N. Otsu, IEEE Trans SMC 9(1):62-66, 1979).
"""

from __future__ import annotations

import numpy as np
import pytest
from skimage.exposure import match_histograms
from skimage.filters import threshold_otsu

from viewer_plugin.kernels import equalise_to_reference
from viewer_plugin.kernels.primitives.matching import (
    apply_lookup,
    empirical_cdf,
    match_to_cdf,
    quantile_cdf,
    quantile_levels,
    row_quantiles,
    specification_lookup,
)
from viewer_plugin.kernels.primitives.threshold import otsu_mask, otsu_threshold


def image_pair(dtype, seed):
    rng = np.random.default_rng(seed)
    source = rng.gamma(2.0, 40.0, size=(48, 40)) + 20
    reference = rng.normal(300.0, 60.0, size=(40, 52)).clip(0) + rng.gamma(1.5, 30.0, (40, 52))
    if np.dtype(dtype).kind in "ui":
        top = np.iinfo(dtype).max
        return np.clip(source, 0, top).astype(dtype), np.clip(reference, 0, top).astype(dtype)
    return source.astype(dtype), reference.astype(dtype)


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.int32, np.float32, np.float64])
@pytest.mark.parametrize("seed", range(4))
def test_exact_matching_equals_match_histograms(dtype, seed):
    source, reference = image_pair(dtype, seed)
    ours = match_to_cdf(source, empirical_cdf(reference))
    exact = match_histograms(source, reference)          # float32 for float32 input
    rtol = 1e-6 if exact.dtype == np.float32 else 1e-12
    np.testing.assert_allclose(ours, exact, rtol=rtol, atol=1e-9)


@pytest.mark.parametrize("seed", range(3))
def test_equalise_to_reference_equals_match_histograms_frame_by_frame(seed):
    rng = np.random.default_rng(seed)
    series = (100 + rng.poisson(50, size=(6, 3, 24, 24)) * (0.8 ** np.arange(6))[:, None, None, None])
    series = series.astype(np.uint16)
    out = equalise_to_reference(series, reference=2)
    assert out.dtype == np.float32
    for t in range(6):
        np.testing.assert_allclose(out[t], match_histograms(series[t], series[2]), rtol=1e-6)


@pytest.mark.parametrize("seed", range(4))
def test_quantile_lookup_approaches_match_histograms(seed):
    """With 4097 quantile levels of continuous data the lookup gives match_histograms'
    picture within 0.5 % of the reference's range (the tails are interpolated)."""
    source, reference = image_pair(np.float64, seed)
    source_q = row_quantiles(source.reshape(1, -1), 4097)[0]
    reference_q = row_quantiles(reference.reshape(1, -1), 4097)[0]
    lookup = specification_lookup(quantile_cdf(source_q), (reference_q, quantile_levels(4097)))
    out = np.empty(source.shape, dtype=np.float32)
    apply_lookup(source, lookup, out)
    exact = match_histograms(source, reference)
    assert np.mean(np.abs(out - exact)) < 0.005 * np.ptp(reference)


def test_quantile_cdf_of_ties_takes_the_highest_level():
    values, fractions = quantile_cdf(np.array([2.0, 2.0, 2.0, 3.0, 7.0]))
    assert values.tolist() == [2.0, 3.0, 7.0]
    assert fractions.tolist() == [0.5, 0.75, 1.0]
    # the same rule as the exact distribution: fraction of values at or below
    assert empirical_cdf(np.array([2.0, 2.0, 3.0, 7.0]))[1].tolist() == [0.5, 0.75, 1.0]


@pytest.mark.parametrize("seed", range(6))
def test_otsu_threshold_equals_skimage(seed):
    rng = np.random.default_rng(seed)
    values = np.concatenate([rng.normal(100, 10, 5000), rng.normal(400, 40, int(rng.integers(50, 3000)))])
    assert otsu_threshold(values) == threshold_otsu(values)
    with_nan = np.concatenate([values, [np.nan, np.inf]])
    assert otsu_threshold(with_nan) == threshold_otsu(values)


def test_otsu_threshold_of_constant_and_empty_input():
    assert otsu_threshold(np.full(10, 3.0)) == 3.0
    assert np.isnan(otsu_threshold(np.array([np.nan])))
    assert not otsu_mask(np.full((8, 8), 5.0)).any()


def test_otsu_mask_finds_sparse_structure():
    """A structure of 0.05 % of the voxels keeps a class of its own (full-range histogram)."""
    rng = np.random.default_rng(3)
    image = rng.normal(100, 5, size=(400, 400))
    image[200:204, 100:120] += 600                     # 80 voxels of 160 000
    mask = otsu_mask(image)
    assert mask[201:203, 102:118].all()
    assert mask.sum() < 400
    assert otsu_threshold(image) == threshold_otsu(image)
