"""The "Bleaching check" dock widget under Xvfb, on the synthetic demo.

Reference values: the demo records its true bleaching rate (per frame 1 - (1 - k)**N for N
slice exposures per time point; first-order kinetics, from memory) and attenuation length;
the widget's estimates are compared with them, as the kernel tests do.
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin import demo
from viewer_plugin.samples import demo_layer

pytestmark = pytest.mark.gui

WAIT_MS = 120_000


def _add(viewer, stack):
    data, kwargs, _ = demo_layer(stack)
    return viewer.add_image(data, **kwargs)


def _series():
    return demo.bleach_series(n_time=10, shape=(6, 64, 64), n_fibres=4)


def _run(qtbot, widget, worker):
    assert worker is not None
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)


def test_check_on_the_demo_series_shows_verdict_and_plot(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    series = _series()
    layer = _add(viewer, series)
    before = layer.data.copy()
    widget = BleachingWidget(viewer)
    viewer.window.add_dock_widget(widget, area="right")
    assert widget.layer_combo.value is layer
    assert widget.axis_kind.value == "time"                       # a 4-D layer with a t axis
    assert widget.interval.value == pytest.approx(series.truth["interval_s"])
    assert widget.tolerance.value == pytest.approx(10.0)
    assert "common-practice default" in widget.tolerance_note.value
    assert "relative" in widget.caution.value and "amplifies" in widget.caution.value
    _run(qtbot, widget, widget.check(start_thread=False))
    report = widget.report
    assert report is not None and report.axis_kind == "time"
    assert report.rate_per_frame == pytest.approx(series.truth["bleach_rate_per_frame"], rel=0.1)
    assert report.summary in widget.verdict.value
    assert "Demo truth" in widget.verdict.value
    # this series loses about 5 % (truth 1 - (1 - 0.006)**9): the whole interval is below 10 %
    # and above 2 %; the verdict is shown in words and in a colour of its own
    assert report.verdict == "within"
    assert widget.badge.visible and widget.badge.value == "Within tolerance"
    assert "#0072B2" in widget.badge.native.styleSheet()
    widget.tolerance.value = 2.0
    _run(qtbot, widget, widget.check(start_thread=False))
    assert widget.report.verdict == "exceeds" and widget.badge.value == "Exceeds tolerance"
    assert "#D55E00" in widget.badge.native.styleSheet()
    axes = widget.figure.axes
    assert len(axes) == 1 and len(axes[0].lines) >= 3              # measured, model, tolerance
    np.testing.assert_array_equal(layer.data, before)


def test_correct_adds_a_new_layer_with_the_same_geometry(make_napari_viewer, qtbot):
    from viewer_plugin.kernels import estimate_bleaching
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    layer = _add(viewer, _series())
    before = layer.data.copy()
    widget = BleachingWidget(viewer)
    _run(qtbot, widget, widget.correct(start_thread=False))
    out = viewer.layers[f"{layer.name} bleaching-corrected"]
    assert out.data.dtype == np.float32 and out.data.shape == layer.data.shape
    np.testing.assert_allclose(out.scale, layer.scale)
    np.testing.assert_allclose(out.translate, layer.translate)
    np.testing.assert_array_equal(layer.data, before)
    again = estimate_bleaching(np.asarray(out.data), interval=30.0)
    assert abs(again.fraction_lost) < 0.02                         # flattened


def test_single_stack_shows_the_two_pass_caveat(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    _add(viewer, demo.fibre_slab(shape=(20, 64, 64), n_fibres=4))
    widget = BleachingWidget(viewer)
    assert widget.axis_kind.value == "depth"
    assert widget.interval.value == pytest.approx(1.0)             # z-step from the layer scale
    _run(qtbot, widget, widget.check(start_thread=False))
    assert "cannot tell" in widget.caveat.value and "two-pass" in widget.caveat.value
    assert "depth attenuation" in widget.verdict.value


def test_two_pass_mode_shows_both_estimates_with_truth(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.bleaching import TWO_PASS, BleachingWidget

    viewer = make_napari_viewer(show=True)
    forward, reverse = demo.two_pass_pair()
    _add(viewer, forward)
    _add(viewer, reverse)
    widget = BleachingWidget(viewer)
    widget.mode.value = TWO_PASS
    assert widget.forward_combo.value.name == forward.name
    assert widget.reverse_combo.value.name == reverse.name
    _run(qtbot, widget, widget.check(start_thread=False))
    result = widget.two_pass
    assert result is not None
    low, high = result.rate_interval
    assert low <= forward.truth["bleach_rate_per_exposure"] <= high
    text = widget.verdict.value
    assert "per slice exposure" in text and "attenuation length" in text and "Demo truth" in text
    assert "95 % interval of the loss" in text
    assert widget.badge.value == {"within": "Within tolerance", "inconclusive": "Inconclusive",
                                  "exceeds": "Exceeds tolerance"}[result.verdict]
    assert len(widget.figure.axes) == 2


def test_all_background_layer_is_a_notification(make_napari_viewer, qtbot, errors):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    noise = np.random.default_rng(0).poisson(100, size=(6, 3, 32, 32)).astype(np.uint16)
    viewer.add_image(noise, name="noise")
    widget = BleachingWidget(viewer)
    _run(qtbot, widget, widget.check(start_thread=False))
    assert errors and "background" in errors[0]
    assert widget.report is None
    assert len(viewer.layers) == 1


def test_time_axis_on_a_stack_without_one_is_a_notification(make_napari_viewer, errors):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    _add(viewer, demo.fibre_slab(shape=(8, 32, 32), n_fibres=2))
    widget = BleachingWidget(viewer)
    widget.axis_kind.value = "time"
    assert widget.check(start_thread=False) is None
    assert errors and "time axis" in errors[0]


def test_a_layer_without_units_gets_an_interval_hint(make_napari_viewer):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    viewer.add_image(_series().data, name="plain")          # no scale, no units
    widget = BleachingWidget(viewer)
    assert widget.interval.value == 1.0
    assert "check it" in widget.interval_hint.value
    _add(viewer, _series())
    widget.layer_combo.value = viewer.layers["fibre slab series"]
    assert widget.interval.value == pytest.approx(30.0) and widget.interval_hint.value == ""


def test_cancel_stops_the_check_without_a_result(make_napari_viewer, qtbot, monkeypatch):
    import napari.utils.notifications as notes

    from viewer_plugin.widgets.bleaching import BleachingWidget

    infos: list[str] = []
    monkeypatch.setattr(notes, "show_info", infos.append)
    viewer = make_napari_viewer(show=True)
    _add(viewer, _series())
    widget = BleachingWidget(viewer)
    worker = widget.check(start_thread=False)
    widget.task._cancel_requested = True   # what Cancel sets: the next progress call raises Cancelled
    _run(qtbot, widget, worker)
    assert widget.report is None
    assert any("cancelled" in text for text in infos)


def test_verdict_colours_stay_apart_with_colour_vision_deficiency():
    """Each verdict has words and a colour of its own. Simulated deuteranomaly, protanomaly and
    tritanomaly at full severity (Machado, Oliveira & Fernandes 2009, via colorspacious) keep
    every pair of badge colours at least 25 CAM02-UCS units apart (measured 30.8 or more), and
    CIELAB lightness (skimage.color.rgb2lab) separates them too; the text colour on each has a
    WCAG contrast ratio of at least 3.9 (relative luminance, WCAG 2 definition)."""
    import itertools

    from skimage.color import rgb2lab

    from viewer_plugin.jobs.choices import VERDICT_COLOURS, VERDICT_WORDS, VERDICTS
    from viewer_plugin.widgets.bleaching import verdict_badge_style

    colorspacious = pytest.importorskip("colorspacious")

    def rgb(hex_colour):
        return np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0

    def luminance(c):
        linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
        return float(linear @ [0.2126, 0.7152, 0.0722])

    assert set(VERDICT_COLOURS) == set(VERDICTS) == set(VERDICT_WORDS)
    backgrounds = {v: rgb(VERDICT_COLOURS[v][0]) for v in VERDICTS}
    lightness = sorted(float(rgb2lab(c[None, None])[0, 0, 0]) for c in backgrounds.values())
    assert min(np.diff(lightness)) > 5
    for cvd in ("deuteranomaly", "protanomaly", "tritanomaly"):
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        seen = {v: np.clip(colorspacious.cspace_convert(c, space, "sRGB1"), 0, 1)
                for v, c in backgrounds.items()}
        for a, b in itertools.combinations(VERDICTS, 2):
            assert colorspacious.deltaE(seen[a], seen[b], input_space="sRGB1") >= 25, (cvd, a, b)
    for verdict, (background, text) in VERDICT_COLOURS.items():
        high, low = sorted((luminance(rgb(background)), luminance(rgb(text))), reverse=True)
        assert (high + 0.05) / (low + 0.05) >= 3.9
        assert background in verdict_badge_style(verdict)
