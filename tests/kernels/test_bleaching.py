"""estimate_bleaching and correct_bleaching against known rates and outside references.

References used below (see /work/shared/REFERENCES.md):
- first-order bleaching I_t = I_0 (1 - k)**t, half-life ln 2 / -ln(1 - k) frames: standard
  first-order kinetics (from memory);
- a sum of exponentials or a non-fading part for non-uniform illumination: Berglund,
  J Chem Phys 2004, doi:10.1063/1.1636726;
- rescaling by the measured signal: ratio normalisation to the first frame (common practice);
- rescaling by the fitted decay: follows from first-order kinetics (derived);
- histogram specification: Gonzalez & Woods, Digital Image Processing, ch. 3 (from memory);
- nonlinear least squares: scipy.optimize.curve_fit; histogram matching:
  skimage.exposure.match_histograms (reference libraries).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import curve_fit
from skimage.exposure import match_histograms

from viewer_plugin.kernels import (
    Cancelled,
    ParameterError,
    correct_bleaching,
    equalise_to_reference,
    estimate_bleaching,
)
from viewer_plugin.kernels.bleaching import BleachingReport

OFFSET = 100.0


def structure(shape=(4, 48, 48)) -> np.ndarray:
    """Two bright bars on a dark field (photons per voxel at t = 0)."""
    out = np.zeros(shape)
    out[:, 8:16, 4:44] = 400.0
    out[:, 30:34, 10:40] = 250.0
    return out


def series_with(decay: np.ndarray, *, seed: int | None = 0, shape=(4, 48, 48), haze=2.0) -> np.ndarray:
    """Counts = offset + Poisson(structure * decay[t] + haze); noise-free when seed is None."""
    photons = (structure(shape) + haze)[None] * np.asarray(decay, dtype=float)[:, None, None, None]
    if seed is None:
        return OFFSET + photons
    rng = np.random.default_rng(seed)
    return (OFFSET + rng.poisson(photons)).astype(np.uint16)


def first_order(k: float, n: int) -> np.ndarray:
    return (1.0 - k) ** np.arange(n)


# --------------------------------------------------------------------------- estimate


def test_noise_free_rate_and_half_life_are_exact():
    """First-order kinetics (from memory): t_1/2 = ln 2 / -ln(1 - k) frames, times the interval."""
    k, n, interval = 0.04, 25, 12.0
    report = estimate_bleaching(series_with(first_order(k, n), seed=None), interval=interval)
    assert report.model == "single"
    assert report.rate_per_frame == pytest.approx(k, rel=1e-6)
    assert report.half_life == pytest.approx(math.log(2) / -math.log1p(-k) * interval, rel=1e-6)
    assert report.fraction_lost == pytest.approx(1 - (1 - k) ** (n - 1), rel=1e-6)
    assert report.exceeds_tolerance and report.axis_kind == "time" and report.caveat == ""
    assert report.r_squared == pytest.approx(1.0, abs=1e-9)


def test_noisy_rate_recovered_within_its_interval():
    """Poisson noise on ~10^5 foreground photons per frame: k is recovered to about 1 %
    (relative), so a 3 % bound is a comfortable margin; the true k lies in the 95 % interval."""
    k, n = 0.03, 30
    report = estimate_bleaching(series_with(first_order(k, n)), interval=5.0)
    assert report.rate_per_frame == pytest.approx(k, rel=0.03)
    low, high = report.rate_interval
    assert low <= k <= high
    expected_half = math.log(2) / -math.log1p(-k) * 5.0
    assert report.half_life == pytest.approx(expected_half, rel=0.03)
    assert report.half_life > 0


def test_fit_agrees_with_scipy_curve_fit_on_the_same_profile():
    """scipy.optimize.curve_fit of I_0 (1 - k)**t on report.profile gives the same k (reference)."""
    report = estimate_bleaching(series_with(first_order(0.05, 20), seed=3))
    t = np.arange(report.n_frames)
    (i0, k), _ = curve_fit(lambda t, i0, k: i0 * (1 - k) ** t, t, report.profile,
                           p0=(report.profile[0], 0.01))
    assert report.model == "single"
    assert report.rate_per_frame == pytest.approx(k, rel=1e-5)
    np.testing.assert_allclose(report.model_profile, i0 * (1 - k) ** t, rtol=1e-5)


def test_summary_sentence_and_verdict():
    report = estimate_bleaching(series_with(first_order(0.05, 21), seed=None), interval=30.0)
    assert report.summary.startswith("Signal fell by 64 % over 21 time points (half-life")
    assert "min" in report.summary and "exceeds the 10 % tolerance" in report.summary
    within = estimate_bleaching(series_with(first_order(0.05, 21), seed=None), tolerance=0.8)
    assert not within.exceeds_tolerance and "within the 80 % tolerance" in within.summary


def test_two_populations_choose_the_double_model():
    """Berglund 2004: non-uniform illumination gives a sum of exponentials."""
    t = np.arange(40)
    decay = 0.4 * 0.7**t + 0.6 * 0.98**t
    report = estimate_bleaching(series_with(decay, seed=None))
    assert report.model == "double" and "F-test" in report.model_choice
    np.testing.assert_allclose(report.model_profile / report.model_profile[0], decay, rtol=1e-4)
    rates = sorted(rate for _, rate in report.components)
    assert rates == pytest.approx([0.02, 0.3], rel=1e-3)
    assert report.fraction_lost == pytest.approx(1 - decay[-1], rel=1e-4)


def test_a_non_fading_part_chooses_the_plateau_model():
    """Berglund 2004 also allows an offset: a part of the signal that does not fade."""
    t = np.arange(30)
    decay = 0.6 + 0.4 * 0.85**t
    report = estimate_bleaching(series_with(decay, seed=None, haze=0.0))
    assert report.model == "single+plateau"
    assert report.plateau == pytest.approx(0.6, rel=1e-3)
    # 60 % never fades, so the model never falls to half of its first value: infinite half-life
    assert report.half_life == math.inf


def test_single_exponential_stays_single_under_noise():
    report = estimate_bleaching(series_with(first_order(0.02, 30), seed=5))
    assert report.model == "single"


def test_no_bleaching_gives_rate_near_zero_and_no_verdict():
    report = estimate_bleaching(series_with(np.ones(20), seed=2))
    assert abs(report.rate_per_frame) < 2e-3
    assert not report.exceeds_tolerance
    assert "No significant fading" in report.summary


def test_rising_signal_is_not_bleaching_and_half_life_is_infinite():
    report = estimate_bleaching(series_with(1.02 ** np.arange(15), seed=None))
    assert report.rate_per_frame < 0 and report.fraction_lost < 0
    assert report.half_life == math.inf and not report.exceeds_tolerance


def test_a_fibre_appearing_does_not_read_as_bleaching():
    """The mask is fixed on the first frame: a structure that appears later is not counted."""
    data = series_with(np.ones(20), seed=4).astype(np.float64)
    data[10:, :, 40:44, 4:44] += 600.0          # a new bright bar from frame 10 on
    report = estimate_bleaching(data)
    assert abs(report.rate_per_frame) < 2e-3 and abs(report.fraction_lost) < 0.02
    assert not report.exceeds_tolerance


def test_a_fibre_disappearing_from_a_masked_region_is_measured():
    """Counter-check: the mask does not hide changes of the structure it contains."""
    data = series_with(np.ones(20), seed=4).astype(np.float64)
    data[10:, :, 8:16, 4:44] = OFFSET + 2.0      # the big bar switches off
    report = estimate_bleaching(data)
    assert report.fraction_lost > 0.5


def test_depth_axis_report_carries_the_caveat():
    """One stack cannot tell bleaching from attenuation (Denk 1990 / Patterson & Piston 2000:
    in one-photon imaging each slice's exposure bleaches the whole depth)."""
    stack = series_with(first_order(0.03, 30), seed=1)[:, 0]       # (Z, Y, X)
    report = estimate_bleaching(stack, interval=2.0)
    assert report.axis_kind == "depth"
    assert "cannot tell" in report.caveat and "separate_bleaching" in report.caveat
    assert "two-pass" in report.caveat
    assert "cannot tell bleaching from depth attenuation" in report.summary
    assert "µm" in report.summary
    assert report.rate_per_frame == pytest.approx(0.03, rel=0.05)


def test_axis_argument_moves_the_acquisition_axis():
    data = series_with(first_order(0.04, 12), seed=None)
    moved = np.moveaxis(data, 0, 2)
    a = estimate_bleaching(data)
    b = estimate_bleaching(moved, axis=2, axis_kind="time")
    assert b.rate_per_frame == pytest.approx(a.rate_per_frame, rel=1e-9)


def test_given_mask_and_offset_are_used():
    data = series_with(first_order(0.04, 12), seed=None)
    mask = np.zeros(data.shape[1:], dtype=bool)
    mask[:, 30:34, 10:40] = True                # only the dimmer bar
    report = estimate_bleaching(data, mask=mask, offset=OFFSET)
    assert report.offset == OFFSET
    assert report.profile[0] == pytest.approx(252.0)   # 250 photons + 2 haze above the offset
    assert report.rate_per_frame == pytest.approx(0.04, rel=1e-6)


def test_constant_input_gives_rate_zero():
    report = estimate_bleaching(np.full((6, 4, 8, 8), 7, dtype=np.uint16))
    assert report.rate_per_frame == 0.0 and report.model == "none"
    assert report.half_life == math.inf and not report.exceeds_tolerance


@pytest.mark.parametrize(
    "bad, message",
    [
        (np.zeros((0, 4, 8, 8)), "empty"),
        (np.zeros((1, 4, 8, 8)), "at least 2 frames"),
        (np.zeros((4, 8)), "at least 3 dimensions"),
    ],
)
def test_bad_arrays_raise_clear_errors(bad, message):
    with pytest.raises(ParameterError, match=message):
        estimate_bleaching(bad)


def test_all_background_is_a_clear_error():
    noise = np.random.default_rng(0).poisson(100, size=(10, 4, 32, 32)).astype(np.uint16)
    with pytest.raises(ParameterError, match=r"^series: expected a foreground .* background only"):
        estimate_bleaching(noise)


@pytest.mark.parametrize("tolerance", [0, 1, -0.1, 1.5, float("nan")])
def test_tolerance_must_be_a_fraction(tolerance):
    with pytest.raises(ParameterError, match="tolerance: expected"):
        estimate_bleaching(series_with(np.ones(5), seed=None), tolerance=tolerance)


def test_report_is_frozen_and_profiles_read_only():
    report = estimate_bleaching(series_with(first_order(0.04, 8), seed=None))
    assert isinstance(report, BleachingReport)
    with pytest.raises(AttributeError):
        report.rate_per_frame = 0.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        report.profile[0] = 0.0
    d = report.to_dict()
    assert d["rate_per_frame"] == report.rate_per_frame and isinstance(d["profile"], list)


def test_progress_is_reported_and_can_cancel():
    calls: list[tuple[int, int]] = []
    estimate_bleaching(series_with(first_order(0.04, 8), seed=None),
                       progress=lambda d, t: calls.append((d, t)))
    assert calls and calls[-1][0] == calls[-1][1]

    def stop(done, total):
        raise Cancelled

    with pytest.raises(Cancelled):
        estimate_bleaching(series_with(first_order(0.04, 8), seed=None), progress=stop)


def test_dask_input_gives_the_same_report():
    da = pytest.importorskip("dask.array")
    data = series_with(first_order(0.04, 10), seed=1)
    a = estimate_bleaching(data)
    b = estimate_bleaching(da.from_array(data, chunks=(3, 4, 48, 48)))
    assert b.rate_per_frame == pytest.approx(a.rate_per_frame, rel=1e-9)


# --------------------------------------------------------------------------- correct


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32, np.float64])
def test_fit_correction_flattens_the_foreground(dtype):
    data = series_with(first_order(0.03, 16), seed=2)
    if dtype == np.uint8:
        data = np.clip(data // 3, 0, 255)
    data = data.astype(dtype)
    before = data.copy()
    report = estimate_bleaching(data)
    flat = correct_bleaching(data, report)
    assert flat.dtype == np.float32 and flat.shape == data.shape
    np.testing.assert_array_equal(data, before)                  # input unchanged
    again = estimate_bleaching(flat)
    assert abs(again.fraction_lost) < 0.01
    assert abs(again.rate_per_frame) < 1e-3


def test_fit_correction_keeps_the_background_at_the_offset():
    """(I - offset) * g + offset: a voxel at the offset stays there (background restored, common practice)."""
    data = series_with(first_order(0.05, 10), seed=None, haze=0.0)
    report = estimate_bleaching(data, offset=OFFSET)
    flat = correct_bleaching(data, report)
    np.testing.assert_allclose(flat[:, :, 0, 0], OFFSET, rtol=1e-6)
    np.testing.assert_allclose(flat[-1, 0, 10, 10], flat[0, 0, 10, 10], rtol=1e-5)


def test_ratio_correction_makes_the_measured_profile_constant():
    """Ratio normalisation to the first frame after background (common practice): every
    frame's foreground mean equals the first frame's, by construction."""
    data = series_with(first_order(0.03, 12), seed=6)
    report = estimate_bleaching(data, offset=OFFSET)
    flat = correct_bleaching(data, report, rescale="measured")
    again = estimate_bleaching(flat, offset=OFFSET, mask=flat[0] > OFFSET + 100)
    first_mask = estimate_bleaching(data, offset=OFFSET, mask=flat[0] > OFFSET + 100)
    np.testing.assert_allclose(again.profile, again.profile[0], rtol=0.02)
    assert first_mask.fraction_lost > 0.25


def test_equalise_matches_scikit_image():
    """skimage.exposure.match_histograms of each frame to the first frame (reference library)."""
    data = series_with(first_order(0.05, 6), seed=7)
    matched = equalise_to_reference(data)
    assert matched.dtype == np.float32
    for t in range(data.shape[0]):
        reference = match_histograms(data[t], data[0])
        np.testing.assert_allclose(matched[t], reference, rtol=1e-6, atol=1e-3)


def test_equalise_of_float_input_matches_scikit_image():
    data = series_with(first_order(0.05, 4), seed=None) + np.random.default_rng(0).normal(
        0, 1, size=(4, 4, 48, 48))
    matched = equalise_to_reference(data)
    np.testing.assert_allclose(matched[2], match_histograms(data[2], data[0]), rtol=1e-5)


@pytest.mark.parametrize("rescale", ["model", "measured", "equalise"])
def test_dask_correction_is_lazy_and_equal(rescale):
    da = pytest.importorskip("dask.array")
    data = series_with(first_order(0.04, 8), seed=3)
    report = estimate_bleaching(data)

    def run(series):
        if rescale == "equalise":
            return equalise_to_reference(series)
        return correct_bleaching(series, report, rescale=rescale)

    lazy = run(da.from_array(data, chunks=(3, 2, 24, 24)))
    assert type(lazy).__module__.startswith("dask")
    assert lazy.dtype == np.float32
    np.testing.assert_allclose(lazy.compute(), run(data), rtol=1e-6)


def test_correction_rejects_a_report_of_another_series():
    report = estimate_bleaching(series_with(first_order(0.04, 8), seed=None))
    with pytest.raises(ParameterError, match="report: expected a report of a series with 9 frames"):
        correct_bleaching(series_with(first_order(0.04, 9), seed=None), report)
    with pytest.raises(ParameterError, match="rescale: expected one of"):
        correct_bleaching(series_with(first_order(0.04, 8), seed=None), report, rescale="magic")
    with pytest.raises(ParameterError, match="report: expected a BleachingReport"):
        correct_bleaching(series_with(first_order(0.04, 8), seed=None), {"rate": 0.1})


def test_correction_of_a_constant_series_is_the_identity():
    data = np.full((5, 3, 8, 8), 9, dtype=np.uint16)
    out = correct_bleaching(data, estimate_bleaching(data))
    np.testing.assert_array_equal(out, 9.0)


def test_nan_voxels_and_a_nan_frame_are_ignored():
    """NaN marks missing data: ignored voxel by voxel, and a frame without values is left out."""
    data = series_with(first_order(0.04, 12), seed=None)
    data[:, :, 0, 0] = np.nan
    data[5] = np.nan
    report = estimate_bleaching(data)
    assert report.rate_per_frame == pytest.approx(0.04, rel=1e-6)
    assert not report.used[5] and report.used.sum() == 11
