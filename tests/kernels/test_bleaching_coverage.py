"""Coverage of the 95 % intervals of the bleaching check, and the three-way verdict.

Random series with a known first-order truth, I_t = I_0 (1 - k)**t (first-order kinetics, from
memory; REFERENCES.md "first-order bleaching"), each with its own structure, brightness, rate
and length. The count of series whose interval holds the truth is Binomial(n, 0.95) when the
interval is right: for n = 50, P(X <= 43) = 0.012 (REFERENCES.md "testing coverage",
scipy.stats.binom), so at least 44 of 50 must be covered.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage, stats

from viewer_plugin.kernels import estimate_bleaching

N_SERIES = 50
MIN_COVERED = 44  # P(Binomial(50, 0.95) <= 43) = 0.012


def test_binomial_limit_is_the_documented_one():
    """scipy.stats.binom (reference library) gives the limit used below."""
    assert stats.binom.cdf(MIN_COVERED - 1, N_SERIES, 0.95) == pytest.approx(0.012, abs=0.001)


def random_series(rng: np.random.Generator, *, k: float, n: int, photons: float,
                  shape=(2, 48, 48)) -> np.ndarray:
    """uint16 counts: offset 100 + Poisson((blobs + haze) (1 - k)**t), blobs of random size,
    position and brightness (a fresh structure for every series)."""
    points = rng.random(shape) < 0.01
    blobs = np.zeros(shape)
    blobs[points] = rng.uniform(0.3, 1.0, int(points.sum()))
    blobs = ndimage.gaussian_filter(blobs, (0, 1.5, 1.5)) * 2 * np.pi * 1.5**2 * photons
    decay = (1.0 - k) ** np.arange(n)
    mean = (blobs + 2.0)[None] * decay[:, None, None, None]
    return (100 + rng.poisson(mean)).astype(np.uint16)


def test_rate_and_loss_intervals_cover_the_truth():
    """50 random time series: rate 0.2-5 % per frame, 8-40 frames, 20-400 photons at a blob's
    peak. The 95 % intervals of the rate and of the loss (1 - (1 - k)**(n - 1)) must each hold
    the truth in at least 44 of 50 (binomial limit above)."""
    rng = np.random.default_rng(2024)
    rate_hits = loss_hits = 0
    for _ in range(N_SERIES):
        k = float(rng.uniform(0.002, 0.05))
        n = int(rng.integers(8, 41))
        series = random_series(rng, k=k, n=n, photons=float(rng.uniform(20.0, 400.0)))
        report = estimate_bleaching(series, interval=10.0)
        low, high = report.rate_interval
        rate_hits += low <= k <= high
        lost = 1.0 - (1.0 - k) ** (n - 1)
        lo, hi = report.fraction_lost_interval
        loss_hits += lo <= lost <= hi
    assert rate_hits >= MIN_COVERED, rate_hits
    assert loss_hits >= MIN_COVERED, loss_hits
