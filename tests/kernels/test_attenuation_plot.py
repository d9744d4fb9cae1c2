"""The attenuation figure builder (matplotlib, headless): what is drawn is the fit's data.

Reference: matplotlib's own Line2D data and axis scales (reference library).
"""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.figure import Figure

from viewer_plugin.kernels import estimate_attenuation
from viewer_plugin.plots.attenuation import attenuation_figure, length_text, truth_text


@pytest.fixture(scope="module")
def fit():
    rng = np.random.default_rng(0)
    z = np.arange(20)[:, None, None] * 2.0
    stack = np.full((20, 64, 64), 100.0)
    stack[:, ::8, :] += 1000 * np.exp(-z / 50.0)
    return estimate_attenuation(rng.poisson(stack).astype(np.uint16), z_step=2.0)


def test_figure_shows_profile_model_and_gain(fit):
    fig = attenuation_figure(fit, truth={"attenuation_length_um": 50.0,
                                         "effective_attenuation_length_um": 50.0})
    top, bottom = fig.axes
    assert top.get_yscale() == "log" and bottom.get_xlabel() == "depth (µm)"
    model_line = top.get_lines()[-1]
    np.testing.assert_allclose(model_line.get_ydata(), fit.model_profile)
    np.testing.assert_allclose(bottom.get_lines()[0].get_ydata(), fit.gain)
    assert "ℓ =" in top.get_title(loc="left") and "true (demo): 50 µm" in top.get_title(loc="left")


def test_figure_reuse_linear_scale_and_cap(fit):
    figure = Figure()
    out = attenuation_figure(fit, log_scale=False, max_gain=1.2, figure=figure, annotate=False)
    assert out is figure and len(figure.axes) == 2
    top, bottom = figure.axes
    assert top.get_yscale() == "linear" and top.get_title(loc="left") == ""
    assert bottom.get_lines()[0].get_ydata().max() == pytest.approx(1.2)
    assert any(line.get_linestyle() == "--" for line in bottom.get_lines())


def test_texts(fit):
    assert length_text(fit).startswith("ℓ = ") and "95 %" in length_text(fit)
    assert truth_text(None) == "" and truth_text({"other": 1}) == ""
