"""The synthetic demo scenario: deterministic, and it records its true parameters."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from viewer_plugin import demo
from viewer_plugin.io import read_stack
from viewer_plugin.samples import sample_bleach_series, sample_fibre_slab, sample_two_pass

SMALL = {"shape": (12, 48, 48), "n_fibres": 3}


def test_same_seed_same_stack_other_seed_other_stack():
    a, b, c = demo.fibre_slab(seed=3, **SMALL), demo.fibre_slab(seed=3, **SMALL), demo.fibre_slab(seed=4, **SMALL)
    np.testing.assert_array_equal(a.data, b.data)
    assert not np.array_equal(a.data, c.data)


def test_fibre_slab_records_its_truth():
    stack = demo.fibre_slab(**SMALL)
    assert stack.data.dtype == np.uint16 and stack.axes == "ZYX"
    assert stack.scale == (1.0, 0.3, 0.3)
    truth = stack.truth
    for key in ("attenuation_length_um", "bleach_rate_per_exposure", "effective_attenuation_length_um",
                "voxel_size_um", "detector_offset", "seed"):
        assert key in truth
    # Beer-Lambert with first-order bleaching per slice: 1/L_eff = 1/L - ln(1 - k)/dz (derived)
    expected = 1 / (1 / truth["attenuation_length_um"] - np.log(1 - truth["bleach_rate_per_exposure"]) / 1.0)
    assert truth["effective_attenuation_length_um"] == pytest.approx(expected)


def test_background_sits_at_the_detector_offset_plus_haze():
    """Mean background = offset + gain * haze photons (mean of a Poisson variable is its rate)."""
    stack = demo.fibre_slab(seed=0, shape=(4, 128, 128), n_fibres=1)
    t = stack.truth
    first = stack.data[0].astype(float)
    background = first[first < np.percentile(first, 80)]
    expected = t["detector_offset"] + t["counts_per_photon"] * t["haze_photons"]
    assert background.mean() == pytest.approx(expected, rel=0.03)


def test_series_and_two_pass_truth():
    series = demo.bleach_series(n_time=3, shape=(4, 32, 32), n_fibres=2)
    assert series.axes == "TZYX" and series.data.shape == (3, 4, 32, 32)
    k, n = series.truth["bleach_rate_per_exposure"], series.truth["exposures_per_frame"]
    assert series.truth["bleach_rate_per_frame"] == pytest.approx(1 - (1 - k) ** n)
    assert series.scale[0] == series.truth["interval_s"]
    forward, reverse = demo.two_pass_pair(shape=(6, 32, 32), n_fibres=2)
    assert forward.data.shape == reverse.data.shape
    assert "deepest" in reverse.truth["acquisition"]


def test_sample_hooks_return_layer_tuples_with_truth():
    for hook, count in ((sample_fibre_slab, 1), (sample_bleach_series, 1), (sample_two_pass, 2)):
        layers = hook()
        assert len(layers) == count
        for data, kwargs, kind in layers:
            assert kind == "image" and data.dtype == np.uint16
            assert "truth" in kwargs["metadata"] and len(kwargs["scale"]) == data.ndim


def test_shipped_sample_file_matches_the_generator():
    path = Path(__file__).resolve().parents[1] / "sample_data" / "fibre_slab.ome.tif"
    stack = read_stack(path)
    assert path.stat().st_size <= 8 * 2**20
    fresh = demo.fibre_slab()
    assert stack.axes == "ZYX" and stack.data.shape == fresh.data.shape
    assert stack.scale == pytest.approx(fresh.scale)
    assert stack.metadata["truth"]["attenuation_length_um"] == fresh.truth["attenuation_length_um"]


def test_photomultiplier_excess_noise_scales_the_variance():
    """Var(counts) = F2 * g**2 * photons for Poisson photons and a random gain per
    photoelectron with mean g and variance (F2 - 1) g**2 (law of total variance; the
    excess noise factor F2 as usually defined for photomultipliers). With no structure the
    counts are offset + gain * Poisson(haze) with haze photons per voxel."""
    flat = {"shape": (6, 128, 128), "n_fibres": 0, "read_noise_counts": 0.0,
            "attenuation_length_um": float("inf"), "bleach_rate_per_exposure": 0.0}
    for f2 in (1.0, 1.5):
        stack = demo.fibre_slab(seed=7, excess_noise_f2=f2, **flat)
        t = stack.truth
        counts = stack.data.astype(float) - t["detector_offset"]
        mean = t["counts_per_photon"] * t["haze_photons"]
        assert counts.mean() == pytest.approx(mean, rel=0.01)
        # rounding to integer counts adds 1/12 (uniform rounding error, derived)
        expected = f2 * t["counts_per_photon"] ** 2 * t["haze_photons"] + (1 / 12 if f2 > 1 else 0)
        assert counts.var() == pytest.approx(expected, rel=0.03)
        assert t["excess_noise_f2"] == f2


def test_structure_is_kept_on_request():
    stack = demo.fibre_slab(keep_structure=True, **SMALL)
    assert stack.structure is not None and stack.structure.shape == stack.data.shape
    assert stack.structure.max() > 0.3 and demo.fibre_slab(**SMALL).structure is None
