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


# ------------------------------------------------------------------ the three-way verdict
# Rule (docs/bleaching.md): the 95 % interval of the loss against the tolerance; within when the
# whole interval is at or below it, exceeds when the whole interval is above it, else
# inconclusive. The true loss of each series is 1 - (1 - k)**(n - 1) (first-order kinetics).


def loss_series(seed: int, *, lost: float, n: int = 12, photons: float) -> np.ndarray:
    k = 1.0 - (1.0 - lost) ** (1.0 / (n - 1))
    return random_series(np.random.default_rng(seed), k=k, n=n, photons=photons)


@pytest.mark.parametrize("seed", range(5))
def test_loss_just_below_the_tolerance_with_few_photons_is_inconclusive(seed):
    """True loss 9 % against a 10 % tolerance, 8 frames with about 15 photons at a blob's peak:
    the interval is several per cent wide and spans the tolerance (the point estimate alone
    would have said "within" or "exceeds" by chance)."""
    report = estimate_bleaching(loss_series(seed, lost=0.09, n=8, photons=15.0), tolerance=0.10)
    low, high = report.fraction_lost_interval
    assert low <= 0.10 < high
    assert report.verdict == "inconclusive" and not report.exceeds_tolerance
    assert "inconclusive against the 10 % tolerance" in report.summary
    assert "95 % interval of the loss" in report.summary


@pytest.mark.parametrize("seed", range(3))
def test_clear_cases_stay_within_or_exceeds(seed):
    """Many photons: a 2 % loss is within a 10 % tolerance, a 30 % loss exceeds it."""
    within = estimate_bleaching(loss_series(seed, lost=0.02, photons=300.0), tolerance=0.10)
    assert within.verdict == "within" and not within.exceeds_tolerance
    assert within.fraction_lost_interval[1] <= 0.10
    assert "within the 10 % tolerance (95 % interval of the loss:" in within.summary
    above = estimate_bleaching(loss_series(seed, lost=0.30, photons=300.0), tolerance=0.10)
    assert above.verdict == "exceeds" and above.exceeds_tolerance
    assert above.fraction_lost_interval[0] > 0.10
    assert "exceeds the 10 % tolerance (95 % interval of the loss:" in above.summary


def test_model_choice_states_the_f_test_assumption():
    """The F-test (extra sum of squares) assumes independent frames; the text says so, and says
    when the two-component model was chosen."""
    t = np.arange(40)
    report = estimate_bleaching(100 + 1000.0 * (0.4 * 0.7**t + 0.6 * 0.98**t)[:, None, None, None]
                                * np.pad(np.ones((1, 8, 8)), ((0, 0), (4, 4), (4, 4)))[None])
    assert report.model == "double"
    assert "independent" in report.model_choice and "two exponential components" in report.model_choice
    assert "Two exponential components were fitted" in report.summary
    single = estimate_bleaching(loss_series(0, lost=0.2, photons=300.0))
    assert single.model == "single" and "independent" in single.model_choice
