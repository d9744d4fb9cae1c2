"""Property tests of estimate_bleaching (hypothesis).

Expected behaviour from first-order kinetics (from memory): a series that does not fade has
k = 0; the half-life ln 2 / -ln(1 - k) is positive for k > 0 and infinite for k <= 0, never
negative.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from viewer_plugin.kernels import ParameterError, correct_bleaching, estimate_bleaching

SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def bars(n_frames: int, brightness: float, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    frame = np.zeros((3, 32, 32))
    y = int(rng.integers(2, 20))
    frame[:, y:y + 6, 4:28] = brightness
    return np.broadcast_to(frame, (n_frames, *frame.shape)) + 2.0


@SETTINGS
@given(n=st.integers(5, 30), brightness=st.floats(100, 2000), seed=st.integers(0, 10_000))
def test_no_bleaching_means_rate_near_zero_and_no_verdict(n, brightness, seed):
    rng = np.random.default_rng(seed)
    data = 100 + rng.poisson(bars(n, brightness, seed)).astype(np.float64)
    report = estimate_bleaching(data)
    # Poisson noise of >= 100 photons on >= 400 foreground voxels: the mean per frame is
    # known to < 0.5 %, so a fitted per-frame drift is far below 1 %.
    assert abs(report.rate_per_frame) < 0.01
    assert abs(report.fraction_lost) < 0.05
    assert not report.exceeds_tolerance


@SETTINGS
@given(n=st.integers(3, 25), k=st.floats(-0.05, 0.5), noisy=st.booleans(), seed=st.integers(0, 999))
def test_half_life_is_never_negative(n, k, noisy, seed):
    photons = bars(n, 800.0, seed) * ((1 - k) ** np.arange(n))[:, None, None, None]
    data = 100 + (np.random.default_rng(seed).poisson(photons) if noisy else photons)
    report = estimate_bleaching(data, interval=2.0)
    assert report.half_life >= 0
    if report.rate_per_frame <= 0:
        assert report.half_life == math.inf
    assert math.isfinite(report.rate_per_frame)
    # the verdict is decided from the 95 % interval of the loss (it was the point estimate)
    low, high = report.fraction_lost_interval
    assert report.exceeds_tolerance == (report.verdict == "exceeds")
    if report.verdict == "exceeds":
        assert low > report.tolerance
    elif report.verdict == "within":
        assert high <= report.tolerance


@SETTINGS
@given(value=st.integers(0, 65535), n=st.integers(2, 9),
       dtype=st.sampled_from([np.uint8, np.uint16, np.float32, np.float64]))
def test_constant_input_gives_rate_zero(value, n, dtype):
    if dtype == np.uint8:
        value %= 256
    data = np.full((n, 2, 8, 8), value, dtype=dtype)
    report = estimate_bleaching(data)
    assert report.rate_per_frame == 0.0 and report.half_life == math.inf
    assert not report.exceeds_tolerance
    out = correct_bleaching(data, report)
    np.testing.assert_array_equal(out, np.float32(value))


@SETTINGS
@given(shape=st.lists(st.integers(0, 4), min_size=3, max_size=4).filter(lambda s: 0 in s))
def test_empty_input_is_a_clear_error(shape):
    try:
        estimate_bleaching(np.zeros(shape, dtype=np.uint16))
    except ParameterError as exc:
        assert str(exc).startswith("series: expected")
    else:  # pragma: no cover - the assertion documents the contract
        raise AssertionError("empty input was accepted")
